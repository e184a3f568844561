package digitize

import (
	"math"
	"sort"

	"tracelift/calib"
)

// Second opinions on what calibration decided, from what only the traces
// show: which way the rows run (the calibration pulse leads each row) and
// how long the tracing lasts (a 12-lead printout spans 10 s; common
// practice). Where they disagree with calib's result, Run corrects the
// result in place and says so in its Warnings, so that everything drawn
// or re-derived later from the same result agrees with the traces.

// pulseSides counts the rows that start with a calibration pulse at the
// left as the page lies, and those that would if it were turned half a
// turn (the pulse then sits at the right end, upside down).
func pulseSides(g *gray, rows []rowInfo, pitch float64, cal *calib.Result) (left, right int) {
	rg := turnedGray(g)
	for _, r := range rows {
		if ok, _ := squarePulse(g, r.x0, r.base, pitch, cal.PxPerMM, cal.SpeedMMPerS); ok {
			left++
		}
		if ok, _ := squarePulse(rg, g.w-1-r.x1, float64(g.h)-r.base, pitch, cal.PxPerMM, cal.SpeedMMPerS); ok {
			right++
		}
	}
	return left, right
}

// squarePulse reports whether a calibration pulse stands at the start of
// a row beginning near column x0 with baseline base: two vertical strokes
// rising from the baseline (and not reaching below it, unlike a grid
// line left over on a fax), 100–300 ms apart (common practice: a 200 ms
// pulse; some machines draw it narrower), of equal height of at least
// 2.5 mm (a 1 mV pulse at 5 mm/mV or more), joined by a flat top.
func squarePulse(g *gray, x0 int, base, pitch, pxPerMM, speed float64) (ok bool, heightPx float64) {
	const on = 64
	ink := func(x, y int) bool { return x >= 0 && y >= 0 && x < g.w && y < g.h && g.pix[y*g.w+x] >= on }
	yb := int(base)
	tol := int(math.Ceil(0.6 * pxPerMM))
	below := int(math.Ceil(1.5 * pxPerMM))
	minH := 2.5 * pxPerMM
	maxH := 0.9 * pitch
	from := max(0, x0-int(5*pxPerMM))
	lim := min(g.w, x0+int((0.35*speed+6)*pxPerMM))
	type stroke struct{ x, top, bot int }
	var st []stroke
	for x := from; x < lim; x++ {
		// The lowest inked pixel near the baseline.
		bot := -1
		for y := yb + tol; y >= yb-tol; y-- {
			if ink(x, y) {
				bot = y
				break
			}
		}
		if bot < 0 {
			continue
		}
		// Nothing a little below it.
		clear := true
		for y := bot + 3; y <= bot+below; y++ {
			if ink(x, y) || ink(x, y+below) {
				clear = false
				break
			}
		}
		if !clear {
			continue
		}
		top, last := bot, bot
		for y := bot - 1; y >= max(0, bot-int(maxH)); y-- {
			if ink(x, y) {
				top, last = y, y
			} else if last-y > 3 {
				break
			}
		}
		if float64(bot-top) < minH {
			continue
		}
		if n := len(st); n > 0 && x-st[n-1].x <= 2 {
			st[n-1].top = min(st[n-1].top, top)
			continue
		}
		st = append(st, stroke{x, top, bot})
	}
	for i := range st {
		for j := i + 1; j < len(st); j++ {
			d := float64(st[j].x-st[i].x) / (pxPerMM * speed)
			if d < 0.1 {
				continue
			}
			if d > 0.3 {
				break
			}
			if math.Abs(float64(st[i].top-st[j].top)) > 0.6*pxPerMM {
				continue
			}
			// The flat top: inked (within a couple of px) across.
			ty := (st[i].top + st[j].top) / 2
			n, k := 0, 0
			for x := st[i].x + 2; x < st[j].x-1; x++ {
				n++
				for y := ty - 3; y <= ty+3; y++ {
					if ink(x, y) {
						k++
						break
					}
				}
			}
			if n > 0 && k*10 >= n*7 && openFoot(g, st[i].x, st[j].x, (st[i].bot+st[j].bot)/2, 1, on) {
				bot := base
				return true, bot - float64(ty)
			}
		}
	}
	return false, 0
}

// turnedGray returns g turned half a turn (its raw map too).
func turnedGray(g *gray) *gray {
	out := &gray{w: g.w, h: g.h, pix: reversed(g.pix)}
	if g.raw != nil {
		out.raw = reversed(g.raw)
	}
	return out
}

func reversed(p []uint8) []uint8 {
	out := make([]uint8, len(p))
	n := len(p)
	for i, v := range p {
		out[n-1-i] = v
	}
	return out
}

// Trace spans worth snapping to, s: a 10 s page (common practice for a
// 12-lead printout at 25 mm/s). At 50 mm/s a page holds whatever fits.
var pageSpansS = []float64{10}

// maxSpanFix is the largest scale error corrected from the trace span:
// a looser match is more likely a page of another length (printers fit
// 9.7–9.9 s, say, to the paper). 1 %: calib's scale from the pulse and
// the sheet is good to about 0.7 % (its fax sweep, p95), and the span
// from the one-clock fit to a pixel or two.
const maxSpanFix = 0.01

// spanScale returns the factor calib's px/mm is off by, judged from the
// traced span (px) against the standard page durations, with the span
// in seconds at calib's scale and the duration matched; k is 1 when the
// span matches none of them closely, or calib's scale comes from the
// grid (measured over the whole page, closer than a span under
// perspective) or from the user.
func spanScale(spanPx float64, cal *calib.Result) (k, spanS, want float64) {
	spanS = spanPx / (cal.PxPerMM * cal.SpeedMMPerS)
	if cal.Source != "pulse" && cal.Source != "file" && cal.Source != "page" || cal.SpeedMMPerS != 25 {
		return 1, spanS, 0
	}
	for _, w := range pageSpansS {
		r := spanS / w
		// Within 0.1 % (three pixels over a 10 s page at 300 dpi, what
		// the span itself is measured to) nothing is corrected. (0.3 %
		// left a 1x1 strip scaled from its pulse 0.19 % off, 19 ms
		// over its 10 s; bench --cases 100, seeds 1 and 2: faxes 18.5
		// and 15.9 -> 19.0 and 16.9 dB median, all 21.8 and 21.2 -> 21.9
		// and 21.9.)
		if d := math.Abs(r - 1); d <= 0.001 {
			return 1, spanS, w
		} else if d < maxSpanFix {
			return r, spanS, w
		}
	}
	return 1, spanS, 0
}

// Standard gains, mm/mV (common practice: 10, with 5 and 20 the usual
// alternatives and 2.5 or 40 on some machines).
var standardGains = []float64{2.5, 5, 10, 20, 40}

// pulseGain measures the calibration pulses at the starts of the rows
// (a 1 mV pulse; common practice) and returns the standard gain they
// show, or 0 when fewer than two rows show a pulse or their heights
// match no standard gain within 12 %.
func pulseGain(g *gray, rows []rowInfo, pitch float64, cal *calib.Result) float64 {
	var hs []float64
	for _, r := range rows {
		if ok, h := squarePulse(g, r.x0, r.base, pitch, cal.PxPerMM, cal.SpeedMMPerS); ok {
			hs = append(hs, h)
		}
	}
	if len(hs) < 2 {
		return 0
	}
	sort.Float64s(hs)
	mm := hs[len(hs)/2] / cal.PxPerMM
	for _, s := range standardGains {
		if math.Abs(mm-s) < 0.12*s {
			return s
		}
	}
	return 0
}

// isStandardGain reports whether g is within 3 % of a standard gain.
func isStandardGain(g float64) bool {
	for _, s := range standardGains {
		if math.Abs(g-s) <= 0.03*s {
			return true
		}
	}
	return false
}
