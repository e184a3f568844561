package calib

import (
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
	x0, x1 int // columns
	y0, y1 int // top and bottom row (inclusive)
}

// findPulses looks for upright rectangles on the ink map: two vertical
// strokes of equal extent joined by a horizontal top, with an empty inside.
// sLo..sHi bounds the px/mm scale (equal when the grid gave it).
func findPulses(ink *image.Gray, sLo, sHi float64) []Pulse {
	w, h := ink.Rect.Dx(), ink.Rect.Dy()
	on := func(x, y int) bool { return ink.Pix[y*ink.Stride+x] >= 128 }
	minRun := int(math.Max(6, 2.2*sLo)) // a pulse is at least 2.5 mm tall
	maxRun := int(45 * sHi)
	// Vertical runs per column, grouped into strokes across neighbouring
	// columns with the same extent.
	tol := int(math.Max(2, 0.4*sHi))
	// Vertical runs, collected row by row (cache-friendly).
	runsByCol := make([][]stroke, w)
	start := make([]int32, w)
	for i := range start {
		start[i] = -1
	}
	for y := 0; y <= h; y++ {
		var row []uint8
		if y < h {
			row = ink.Pix[y*ink.Stride : y*ink.Stride+w]
		}
		for x := 0; x < w; x++ {
			if y < h && row[x] >= 128 {
				if start[x] < 0 {
					start[x] = int32(y)
				}
				continue
			}
			if s := int(start[x]); s >= 0 {
				if l := y - s; l >= minRun && l <= maxRun {
					runsByCol[x] = append(runsByCol[x], stroke{x, x, s, y - 1})
				}
				start[x] = -1
			}
		}
	}
	var open, strokes []stroke
	for x := 0; x < w; x++ {
		runs := runsByCol[x]
		var next []stroke
		used := make([]bool, len(runs))
		for _, s := range open {
			ext := false
			for i, r := range runs {
				if !used[i] && abs(r.y0-s.y0) <= tol && abs(r.y1-s.y1) <= tol {
					s.x1 = x
					s.y0, s.y1 = min(s.y0, r.y0), max(s.y1, r.y1)
					used[i] = true
					next = append(next, s)
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
			}
		}
		open = next
	}
	strokes = append(strokes, open...)
	// Keep thin strokes only (a trace line, not a filled block).
	var thin []stroke
	for _, s := range strokes {
		if s.x1-s.x0+1 <= int(math.Max(3, 1.2*sHi)) {
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
			if abs(a.y0-b.y0) > tol || abs(a.y1-b.y1) > tol {
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
			if tot == 0 || float64(hit) < 0.85*float64(tot) {
				continue
			}
			// Inside: nearly empty.
			bot := (a.y1 + b.y1) / 2
			in, inTot := 0, 0
			for y := top + th + 2; y < bot-th-1; y++ {
				for x := a.x1 + 2; x < b.x0-1; x++ {
					inTot++
					if on(x, y) {
						in++
					}
				}
			}
			if inTot == 0 || float64(in) > 0.05*float64(inTot) {
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
			xa := float64(a.x0+a.x1) / 2
			xb := float64(b.x0+b.x1) / 2
			// Height between the centre lines of the top and of the baseline,
			// each thickness measured vertically (with anisotropic pixels,
			// resampled, the vertical and horizontal strokes differ), to a
			// fraction of a pixel from the ink levels.
			mid := (a.x1 + b.x0) / 2
			thTop := vThick(ink, mid, top, top+3*th+3)
			thBot := thTop
			if x := a.x0 - 2; x >= 0 {
				thBot = vThick(ink, x, bot-3*th-3, bot)
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

// vThick sums the ink level (0..1) in column x over rows y0..y1: the
// thickness in px of the horizontal stroke crossing there.
func vThick(ink *image.Gray, x, y0, y1 int) float64 {
	var t float64
	for y := max(0, y0); y <= min(ink.Rect.Dy()-1, y1); y++ {
		t += float64(ink.Pix[y*ink.Stride+x]) / 255
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

// settleSettings turns pulse sizes (mm) into gain and speed, compares with
// what was stated, and says what it did.
func settleSettings(ps []Pulse, opt Options) (gain, speed float64, warn []string) {
	statedG, statedS := opt.StatedGainMMPerMV, opt.StatedSpeedMMPerS
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
	// Candidates of a standard height speak for the page; the others are
	// boxes of text or lead-switch marks.
	var std []Pulse
	for _, p := range ps {
		if _, ok := snap(p.HeightMM/pulseMV, stdGains, 0.1); ok {
			std = append(std, p)
		}
	}
	if len(std) > 0 {
		ps = std
	}
	hs := make([]float64, len(ps))
	ws := make([]float64, len(ps))
	for i, p := range ps {
		hs[i], ws[i] = p.HeightMM, p.WidthMM
	}
	hm, wm := median(hs), median(ws)
	g, okG := snap(hm/pulseMV, stdGains, 0.1)
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
	if !okS {
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
