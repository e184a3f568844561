package calib

import (
	"encoding/binary"
	"fmt"
	"image"
	"math"
	"sort"
)

// Calibration pulse: the recorder draws a 1 mV step lasting 200 ms, an
// upright rectangle whose height is the gain (10 mm at 10 mm/mV) and whose
// width is 5 mm at 25 mm/s (AHA/ACCF/HRS recommendations for the
// standardization and interpretation of the ECG, Part I, Kligfield et al.,
// Circulation 2007;115:1306-1324).
const (
	pulseMV = 1.0
	pulseS  = 0.2
)

// Standard settings (same source; 2.5 and 40 mm/mV are offered by some
// recorders, from memory).
var (
	stdGains  = []float64{2.5, 5, 10, 20, 40}
	stdSpeeds = []float64{12.5, 25, 50, 100}
)

type stroke struct {
	x0, x1 int     // columns
	y0, y1 int     // top and bottom row (inclusive)
	sx, n  float64 // Σ column × run length and Σ run length: the centre column
	// Σ over runs of the run's middle row m, m², and column × m, each
	// weighted by the run's length: the stroke's lean.
	sm, smm, sxm float64
}

// lean is the stroke's column change per row (0 for an upright stroke).
func (s stroke) lean() float64 {
	my, mx := s.sm/s.n, s.sx/s.n
	v := s.smm/s.n - my*my
	if v < 1 {
		return 0
	}
	return (s.sxm/s.n - mx*my) / v
}

// findPulses looks for upright rectangles on the ink map: two vertical
// strokes of equal extent joined by a horizontal top, with an empty inside.
// sLo..sHi bounds the px/mm scale (equal when the grid gave it); ink
// from thr on counts (see inkThreshold). With lean the pulse's sides may
// lean alike (a page not flattened, seen at a slant); without, they stand
// upright and each column holds them whole.
func findPulses(ink *image.Gray, sLo, sHi float64, thr uint8, lean bool) []Pulse {
	return findPulsesBy(ink, sLo, sHi, thr, lean, pulseRules{topShare: 0.85})
}

// pulseRules loosen findPulses where the caller knows where a pulse
// stands (the start of a trace row), so that a stroke pair there needs
// less to be one.
type pulseRules struct {
	// topShare is the share of the columns between the sides that must
	// hold the top bar.
	topShare float64
	// footSlack lets the sides' feet differ by this share of the
	// pulse's height: where the trace leaves the falling side joined,
	// it may run on a baseline lower or higher than the pulse's own.
	footSlack float64
	// bridge is the longest gap, px, a side may show and still be one
	// stroke.
	bridge int
}

func findPulsesBy(ink *image.Gray, sLo, sHi float64, thr uint8, lean bool, rules pulseRules) []Pulse {
	w, h := ink.Rect.Dx(), ink.Rect.Dy()
	on := func(x, y int) bool { return ink.Pix[y*ink.Stride+x] >= thr }
	minRun := int(math.Max(6, 2.2*sLo)) // a pulse is at least 2.5 mm tall
	maxRun := int(45 * sHi)
	// Vertical runs per column, grouped into strokes across neighbouring
	// columns with the same extent.
	tol := int(math.Max(2, 0.4*sHi))
	// Vertical runs, collected row by row (cache-friendly).
	runsByCol := make([][]stroke, w)
	start, lastOn := make([]int32, w), make([]int32, w)
	for i := range start {
		start[i] = -1
	}
	// Eight columns at a time are passed over while none of them holds a
	// run and their pixels are paper (0) or, at the usual threshold of
	// 128, all under it (top bits clear).
	openRuns := make([]int, (w+7)/8)
	quiet := func(word uint64) bool {
		if thr == 128 {
			return word&0x8080808080808080 == 0
		}
		return word == 0
	}
	for y := 0; y <= h; y++ {
		var row []uint8
		if y < h {
			row = ink.Pix[y*ink.Stride : y*ink.Stride+w]
		}
		for x := 0; x < w; x++ {
			if x&7 == 0 && x+8 <= w && openRuns[x>>3] == 0 && (y == h || quiet(binary.LittleEndian.Uint64(row[x:x+8]))) {
				x += 7
				continue
			}
			if y < h && row[x] >= thr {
				if start[x] < 0 {
					start[x] = int32(y)
					openRuns[x>>3]++
				}
				lastOn[x] = int32(y)
				continue
			}
			if s := int(start[x]); s >= 0 {
				// A gap of up to rules.bridge rows keeps the run open (a
				// removed grid line crossing a side).
				if y < h && y-int(lastOn[x]) <= rules.bridge {
					continue
				}
				e := int(lastOn[x]) + 1 // the row after the run's last ink
				if l := e - s; l >= minRun && l <= maxRun {
					m := float64(s+e-1) / 2
					runsByCol[x] = append(runsByCol[x], stroke{x, x, s, e - 1, float64(x * l), float64(l), m * float64(l), m * m * float64(l), float64(x) * m * float64(l)})
				}
				start[x] = -1
				openRuns[x>>3]--
			}
		}
	}
	// A stroke grows into the next column by a run over the same rows
	// (within tol); a leaning one (lean) by a run that overlaps its last
	// run and is no more than three times as long or short: it moves along
	// by a few rows a column, and no single column holds it whole.
	var open, strokes []stroke
	var last [][2]int // rows of each open stroke's run in the previous column
	for x := 0; x < w; x++ {
		runs := runsByCol[x]
		var next []stroke
		var nextLast [][2]int
		used := make([]bool, len(runs))
		for k, s := range open {
			ext := false
			for i, r := range runs {
				// Overlapping, and of a like length: the baseline leaving a
				// pulse's foot or a grid line left in the ink map beside
				// its side are runs of quite another length.
				lr, ll := r.y1-r.y0+1, last[k][1]-last[k][0]+1
				grow := abs(r.y0-s.y0) <= tol && abs(r.y1-s.y1) <= tol // upright: the same rows
				if lean {
					grow = r.y0 <= last[k][1]+1 && r.y1 >= last[k][0]-1 && 3*lr >= ll && 3*ll >= lr
				}
				if !used[i] && grow {
					s.x1 = x
					s.y0, s.y1 = min(s.y0, r.y0), max(s.y1, r.y1)
					s.sx, s.n = s.sx+r.sx, s.n+r.n
					s.sm, s.smm, s.sxm = s.sm+r.sm, s.smm+r.smm, s.sxm+r.sxm
					used[i] = true
					next = append(next, s)
					nextLast = append(nextLast, [2]int{r.y0, r.y1})
					ext = true
					break
				}
			}
			if !ext {
				strokes = append(strokes, s)
			}
		}
		for i, r := range runs {
			if !used[i] {
				next = append(next, r)
				nextLast = append(nextLast, [2]int{r.y0, r.y1})
			}
		}
		open, last = next, nextLast
	}
	strokes = append(strokes, open...)
	// Keep thin strokes only (a trace line, not a filled block); a stroke
	// may lean by up to 1 in 8 (about 7°).
	var thin []stroke
	for _, s := range strokes {
		if float64(s.x1-s.x0+1) <= math.Max(3, 1.2*sHi)+float64(s.y1-s.y0+1)/8 {
			thin = append(thin, s)
		}
	}
	sort.Slice(thin, func(i, j int) bool { return thin[i].x0 < thin[j].x0 })
	var out []Pulse
	usedR := make([]bool, len(thin))
	for i, a := range thin {
		for j := i + 1; j < len(thin); j++ {
			b := thin[j]
			gap := b.x0 - a.x1
			if float64(gap) > 12.5*sHi {
				break
			}
			if usedR[j] || float64(gap) < 1.8*sLo {
				continue
			}
			// The sides of a pulse are parallel, upright or leaning alike
			// (a Λ of a QRS complex leans both ways). Upright strokes are
			// held whole by each column, and their lean, fitted on runs
			// of nearly the same rows (a corner or a foot cut short),
			// says nothing: a fax's 20 mm pulse read −1.06 and +1.35.
			footTol := max(tol, int(rules.footSlack*float64(min(a.y1-a.y0, b.y1-b.y0))))
			if abs(a.y0-b.y0) > tol || abs(a.y1-b.y1) > footTol || (lean && math.Abs(a.lean()-b.lean()) > 0.06) {
				continue
			}
			th := max(1, (a.x1-a.x0+1+b.x1-b.x0+1)/2) // line thickness
			top := (a.y0 + b.y0) / 2
			// Top bar: ink near the top in most columns between the strokes.
			hit, tot := 0, 0
			for x := a.x1 + 1; x < b.x0; x++ {
				tot++
				for y := max(0, top-1); y <= min(h-1, top+th+1); y++ {
					if on(x, y) {
						hit++
						break
					}
				}
			}
			if tot == 0 || float64(hit) < rules.topShare*float64(tot) {
				continue
			}
			// Inside: nearly empty, but for a grid line left in the ink map
			// that crosses it from side to side.
			bot := (a.y1 + b.y1) / 2
			if !emptyInside(ink, thr, a.x1+2, b.x0-1, top+th+2, bot-th-1) {
				continue
			}
			// The trace leaves the pulse along its baseline on at least one
			// side (letters such as "n" have no such foot).
			foot := func(x0, x1 int) bool {
				n, tot := 0, 0
				for x := max(0, x0); x <= min(w-1, x1); x++ {
					tot++
					for y := max(0, bot-th-1); y <= min(h-1, bot+1); y++ {
						if on(x, y) {
							n++
							break
						}
					}
				}
				return tot > 0 && float64(n) >= 0.8*float64(tot)
			}
			fl := int(math.Max(3, 0.8*sLo))
			if !foot(a.x0-fl, a.x0-1) && !foot(b.x1+1, b.x1+fl) {
				continue
			}
			xa, xb := a.sx/a.n, b.sx/b.n // a leaning pair's sides are parallel: centre to centre
			// Height between the centre lines of the top and of the baseline,
			// each thickness measured vertically (with anisotropic pixels,
			// resampled, the vertical and horizontal strokes differ), to a
			// fraction of a pixel from the ink levels.
			// The median over several columns: one of them may be a grid
			// line the ink map kept.
			var tt, tb []float64
			for x := a.x1 + 2; x <= b.x0-2; x += max(1, (b.x0-a.x1)/12) {
				tt = append(tt, vThick(ink, x, top, top+3*th+3, thr))
			}
			for x := a.x0 - 2; x >= max(0, a.x0-fl); x-- {
				tb = append(tb, vThick(ink, x, bot-3*th-3, bot, thr))
			}
			thTop := vThick(ink, (a.x1+b.x0)/2, top, top+3*th+3, thr)
			if len(tt) > 0 {
				thTop = median(tt)
			}
			thBot := thTop
			if len(tb) > 0 {
				thBot = median(tb)
			}
			hpx := float64(bot-top+1) - (thTop+thBot)/2
			out = append(out, Pulse{Box: [4]float64{float64(a.x0), float64(top), float64(b.x1), float64(bot)},
				HeightMM: hpx, WidthMM: xb - xa})
			usedR[j] = true
			break
		}
	}
	return out
}

// emptyInside says whether the box [x0,x1)×[y0,y1) holds almost no ink
// (at most 5 % of its pixels), leaving out pale rows and columns inked
// nearly from side to side: a grid line the ink map kept, which is paler
// than the trace (the stroke of a letter is not).
func emptyInside(ink *image.Gray, thr uint8, x0, x1, y0, y1 int) bool {
	if x1 <= x0 || y1 <= y0 {
		return false
	}
	w, h := x1-x0, y1-y0
	rows, cols := make([]int, h), make([]int, w)
	rsum, csum := make([]int, h), make([]int, w)
	for y := y0; y < y1; y++ {
		for x := x0; x < x1; x++ {
			v := int(ink.Pix[y*ink.Stride+x])
			rsum[y-y0] += v
			csum[x-x0] += v
			if v >= int(thr) {
				rows[y-y0]++
				cols[x-x0]++
			}
		}
	}
	pale := 1.6 * float64(thr)
	skipRow := func(i int) bool { return 10*rows[i] >= 8*w && float64(rsum[i]) < pale*float64(w) }
	skipCol := func(i int) bool { return 10*cols[i] >= 8*h && float64(csum[i]) < pale*float64(h) }
	in := 0
	for y := y0; y < y1; y++ {
		if skipRow(y - y0) {
			continue
		}
		for x := x0; x < x1; x++ {
			if !skipCol(x-x0) && ink.Pix[y*ink.Stride+x] >= thr {
				in++
			}
		}
	}
	return float64(in) <= 0.05*float64(w*h)
}

// vThick measures the thickness in px of the horizontal stroke crossing
// column x between rows y0 and y1: the ink level (0..1, full strength at
// twice the threshold thr) summed over the rows around the strongest one
// that stay above half the threshold (a faint grid line nearby is not
// part of the stroke).
func vThick(ink *image.Gray, x, y0, y1 int, thr uint8) float64 {
	y0, y1 = max(0, y0), min(ink.Rect.Dy()-1, y1)
	if y1 < y0 {
		return 1
	}
	full := math.Min(255, 2*float64(thr))
	at := func(y int) uint8 { return ink.Pix[y*ink.Stride+x] }
	best := y0
	for y := y0; y <= y1; y++ {
		if at(y) > at(best) {
			best = y
		}
	}
	lo, hi := best, best
	for lo > y0 && at(lo-1) >= thr/2 {
		lo--
	}
	for hi < y1 && at(hi+1) >= thr/2 {
		hi++
	}
	var t float64
	for y := lo; y <= hi; y++ {
		t += math.Min(1, float64(at(y))/full)
	}
	return math.Max(1, t)
}

func abs(v int) int {
	if v < 0 {
		return -v
	}
	return v
}

// snap rounds v to the nearest standard value within tol (relative).
func snap(v float64, std []float64, tol float64) (float64, bool) {
	best, bd := 0.0, math.Inf(1)
	for _, s := range std {
		if d := math.Abs(math.Log(v / s)); d < bd {
			best, bd = s, d
		}
	}
	if bd <= math.Log(1+tol) {
		return best, true
	}
	return v, false
}

// pulseGain reads the gain from pulse candidates: the median height hm and
// width wm of those of a standard height (they speak for the page; the
// others are boxes of text or lead-switch marks), and of these of the
// ones also of a standard width when some are, or of all when none is,
// and the standard gain g that hm is, ok false when it is none.
func pulseGain(ps []Pulse) (hm, wm, g float64, ok bool) {
	var std []Pulse
	for _, p := range ps {
		if _, ok := snap(p.HeightMM/pulseMV, stdGains, 0.1); ok {
			std = append(std, p)
		}
	}
	if len(std) > 0 {
		ps = std
	}
	// Of those, the ones also as wide as 200 ms at a standard speed are
	// pulses; boxes around text can be of a standard height by chance (a
	// page's label boxes 2.5 mm tall beside its 20 mm pulses).
	var both []Pulse
	for _, p := range ps {
		if _, ok := snap(p.WidthMM/pulseS, stdSpeeds, 0.15); ok && len(std) > 0 {
			both = append(both, p)
		}
	}
	if len(both) > 0 && len(both) < len(ps) {
		ps = both
	}
	hs := make([]float64, len(ps))
	ws := make([]float64, len(ps))
	for i, p := range ps {
		hs[i], ws[i] = p.HeightMM, p.WidthMM
	}
	hm, wm = median(hs), median(ws)
	g, ok = snap(hm/pulseMV, stdGains, 0.1)
	return hm, wm, g, ok
}

// settleSettings turns pulse sizes (mm) into gain and speed, compares with
// what was stated, and says what it did; from says where the speed came
// from (see Result.SpeedFrom).
func settleSettings(ps []Pulse, opt Options) (gain, speed float64, from string, warn []string) {
	statedG, statedS := opt.StatedGainMMPerMV, opt.StatedSpeedMMPerS
	from = SpeedAssumed
	if statedS > 0 {
		from = SpeedStated
	}
	if len(ps) == 0 {
		gain, speed = 10, 25
		if statedG > 0 {
			gain = statedG
		}
		if statedS > 0 {
			speed = statedS
		}
		warn = append(warn, fmt.Sprintf("no calibration pulse found: gain %.4g mm/mV and speed %.4g mm/s are assumed, not measured", gain, speed))
		return
	}
	hm, wm, g, okG := pulseGain(ps)
	gain = g
	if !okG {
		// What looked like a pulse is no standard one: neither its height
		// nor its width is a setting to trust.
		gain, speed = 10, 25
		if statedG > 0 {
			gain = statedG
		}
		if statedS > 0 {
			speed = statedS
		}
		warn = append(warn, fmt.Sprintf("a calibration pulse candidate is %.2f mm tall, which is no standard gain; %.4g mm/mV and %.4g mm/s are assumed, not measured", hm, gain, speed))
		return
	}
	sp, okS := snap(wm/pulseS, stdSpeeds, 0.15)
	speed = sp
	switch {
	case okS && sp == 12.5 && statedS == 0:
		// A pulse half the usual width: 200 ms at 12.5 mm/s, or the
		// 100 ms pulse some carts draw at 25 mm/s. 12-lead pages run at
		// 25 or 50 mm/s (common practice), so 25 is taken, as assumed;
		// the printed settings, read later, still decide
		// (Result.TakePrinted).
		speed = 25
		warn = append(warn, fmt.Sprintf("calibration pulse is %.2f mm wide: 200 ms at 12.5 mm/s or 100 ms at 25 mm/s; speed 25 mm/s is assumed", wm))
	case okS:
		from = SpeedPulse
	default:
		// A pulse width that is not 200 ms at a standard speed: some
		// recorders draw a shorter step; keep the stated or usual speed.
		speed = 25
		if statedS > 0 {
			speed = statedS
		}
		warn = append(warn, fmt.Sprintf("calibration pulse is %.2f mm wide, which is not 200 ms at a standard speed; speed %.4g mm/s is assumed", wm, speed))
	}
	if statedG > 0 && okG && math.Abs(statedG-gain)/statedG > 0.1 {
		warn = append(warn, fmt.Sprintf("calibration pulse says %.4g mm/mV but %.4g mm/mV was stated; the pulse is used", gain, statedG))
	}
	if statedS > 0 && okS && math.Abs(statedS-speed)/statedS > 0.1 {
		warn = append(warn, fmt.Sprintf("calibration pulse width says %.4g mm/s but %.4g mm/s was stated; the pulse is used", speed, statedS))
	}
	return
}

// Where a page's paper speed came from (Result.SpeedFrom).
const (
	SpeedPulse   = "pulse"   // the calibration pulse's width, read as the common 200 ms
	SpeedPrinted = "printed" // the settings printed on the page ("25 mm/s", "50mm/s")
	SpeedStated  = "stated"  // given by the caller (Options.StatedSpeedMMPerS) and not contradicted by a pulse
	SpeedAssumed = "assumed" // nothing said: the common 25 mm/s
)

// TakePrinted settles the page's speed and gain with what its printed
// settings state (0 where none was read); digitize reads that text once
// it knows where the trace rows are, and calls this, so that the rule
// stays here with the pulse's.
//
// The speed: a pulse's width gives the speed only if the pulse lasts the
// common 200 ms, and carts draw narrower ones (100 ms, from memory of
// several makes), so a 5 mm pulse is 25 mm/s or 50 mm/s with a 100 ms
// pulse; the printed speed is what the cart says it ran at, and wins over
// the pulse (common practice: the speed is printed on every 12-lead page).
// A speed given by the caller is kept. With no grid the millimetres
// came from the pulse and the sheet's size together (Detect's fit), and
// they stand: the text changes only the pulse's duration taken. The gain: the pulse's height does
// not share that doubt (a 1 mV pulse, common practice), so the printed
// gain is taken only where no pulse was read (pulseAssumed) and 10 mm/mV
// was assumed.
func (r *Result) TakePrinted(speed, gain float64, pulseAssumed bool) {
	if r.Source == "user" {
		return
	}
	if gain > 0 && gain != r.GainMMPerMV && r.GainMMPerMV == 10 && pulseAssumed {
		r.Warnings = append(r.Warnings, fmt.Sprintf("no calibration pulse; the page's text reads %g mm/mV, which is used (check it)", gain))
		r.GainMMPerMV, r.GainFrom = gain, GainPrinted
	}
	if !(speed > 0) || r.SpeedFrom == SpeedStated {
		return
	}
	switch {
	case speed == r.SpeedMMPerS:
		if r.SpeedFrom != SpeedPulse {
			r.SpeedFrom = SpeedPrinted
		}
	case r.SpeedFrom == SpeedPulse:
		r.Warnings = append(r.Warnings, fmt.Sprintf("the calibration pulse's width is 200 ms at %g mm/s, but the page's text reads %g mm/s: the text is used (a pulse of %.0f ms; check the speed)",
			r.SpeedMMPerS, speed, 200*r.SpeedMMPerS/speed))
		r.SpeedMMPerS, r.SpeedFrom = speed, SpeedPrinted
	default:
		r.Warnings = append(r.Warnings, fmt.Sprintf("no calibration pulse gave the speed; the page's text reads %g mm/s, which is used (check it)", speed))
		r.SpeedMMPerS, r.SpeedFrom = speed, SpeedPrinted
	}
}

// PulsesIn finds calibration pulses on an ink map (from thr on counts as
// ink) within r, at pxPerMM on both axes: the detector Detect uses on the
// whole page, for a tracer that knows where a pulse should stand (the
// start of a trace row). Boxes are in ink's px; HeightMM and WidthMM in
// mm, the width centre to centre of the pulse's sides.
func PulsesIn(ink *image.Gray, r image.Rectangle, pxPerMM float64, thr uint8) []Pulse {
	return pulsesIn(ink, r, pxPerMM, thr, pulseRules{topShare: 0.85})
}

// PulsesAtRowStart is PulsesIn for a window where a pulse is expected
// (a trace row's first stretch), with looser rules than the page-wide
// search, which must not take letters or boxes for pulses: the top bar
// may be broken over 30 % of its length (a faint thermal print), the
// sides' feet may differ by a fifth of the pulse's height (a trace
// joined to the falling side on a baseline of its own), and a side may
// be broken over up to 2 mm (a fax that lost a stretch of a faint line,
// a grid line removed across it). These are the rules the tracer's own
// stroke walk had, which this replaced (bench --cases 100 --seed 1: 8
// cases up, 5 down, by at most 0.9 dB but for case 95, -9.1 -> -3.0).
func PulsesAtRowStart(ink *image.Gray, r image.Rectangle, pxPerMM float64, thr uint8) []Pulse {
	return pulsesIn(ink, r, pxPerMM, thr, pulseRules{topShare: 0.7, footSlack: 0.2, bridge: max(4, int(2*pxPerMM))})
}

func pulsesIn(ink *image.Gray, r image.Rectangle, pxPerMM float64, thr uint8, rules pulseRules) []Pulse {
	r = r.Intersect(ink.Rect)
	if r.Dx() < 4 || r.Dy() < 4 || !(pxPerMM > 0) {
		return nil
	}
	sub := ink.SubImage(r).(*image.Gray)
	ps := findPulsesBy(sub, pxPerMM, pxPerMM, thr, false, rules)
	for i := range ps {
		b := &ps[i].Box
		b[0], b[2] = b[0]+float64(r.Min.X), b[2]+float64(r.Min.X)
		b[1], b[3] = b[1]+float64(r.Min.Y), b[3]+float64(r.Min.Y)
		ps[i].HeightMM /= pxPerMM
		ps[i].WidthMM /= pxPerMM
	}
	return ps
}
