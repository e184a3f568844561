package calib

import (
	"fmt"
	"image"
	"math"
)

// quadToSquare is the homography taking the corners q (image px) to the
// unit square's (0,0), (1,0), (1,1), (0,1): fitHomography on the eight
// coordinates the corners fix.
func quadToSquare(q [4][2]float64) (mat3, bool) {
	sq := [4][2]float64{{0, 0}, {1, 0}, {1, 1}, {0, 1}}
	os := make([]obs, 0, 8)
	for i, c := range q {
		for ax := 0; ax < 2; ax++ {
			os = append(os, obs{x: c[0], y: c[1], val: sq[i][ax], axis: ax, w: 1})
		}
	}
	return fitHomography(os, false)
}

// fromSheet calibrates a photographed sheet with no grid from its outline
// and its calibration pulses: the outline is the picture of a rectangle,
// which fixes the perspective up to the sheet's width and height in mm;
// each pulse, 1 mV tall and 200 ms wide at the settings read (gain, spd),
// gives those two lengths. The page is then rectified like a grid page.
// ps are the pulses as found on the deskewed picture (rect px, through
// M); ok=false leaves the caller's pulse-only result in place.
func fromSheet(pg *Page, wk *work, quad [4][2]float64, M mat3, ps []Pulse, gain, spd float64, opt Options) (*Result, bool) {
	full := w2f(wk.k)
	var qf [4][2]float64
	for i, c := range quad {
		qf[i][0], qf[i][1] = full.apply(c[0], c[1])
	}
	Q, ok := quadToSquare(qf)
	if !ok || len(ps) == 0 || gain <= 0 || spd <= 0 {
		return nil, false
	}
	// Each pulse's height and width as fractions of the sheet's sides.
	var hs, ws []float64
	for _, p := range ps {
		cx, cy := (p.Box[0]+p.Box[2])/2, (p.Box[1]+p.Box[3])/2
		at := func(x, y float64) (float64, float64) { return Q.apply(M.apply(x, y)) }
		_, vt := at(cx, cy-p.HeightMM/2)
		_, vb := at(cx, cy+p.HeightMM/2)
		ul, _ := at(cx-p.WidthMM/2, cy)
		ur, _ := at(cx+p.WidthMM/2, cy)
		if dv, du := math.Abs(vb-vt), math.Abs(ur-ul); dv > 0 && du > 0 {
			hs = append(hs, gain*pulseMV/dv)
			ws = append(ws, spd*pulseS/du)
		}
	}
	if len(hs) == 0 {
		return nil, false
	}
	Hmm, Wmm := median(hs), median(ws)
	// The pulses must agree on the sheet (else the outline is not the
	// sheet's, or the sheet is not flat), and the sheet must be a sheet.
	for i := range hs {
		if math.Abs(hs[i]/Hmm-1) > 0.03 || math.Abs(ws[i]/Wmm-1) > 0.05 {
			return nil, false
		}
	}
	if !standardSide(Wmm) && !standardSide(Hmm) {
		return nil, false // pulses misread, or a sheet of no size recorders print on
	}
	Qi, ok := Q.inv()
	if !ok {
		return nil, false
	}
	if wk.trace != nil {
		wk.trace("sheet: pulses say %.1f × %.1f mm (heights %.4g widths %.4g)", Wmm, Hmm, hs, ws)
	}
	fl, ok := flattenSheet(pg, Qi, Wmm, Hmm, wk.trace)
	if !ok {
		return nil, false
	}
	if !fl.paper && len(fl.pulses) >= 2 {
		// The sheet is no standard size at the pulses' first reading
		// (one pulse, perhaps, on the slanted picture): read them again on
		// the flattened page, all of them, and flatten once more.
		var hs, ws []float64
		for _, p := range fl.pulses {
			hs, ws = append(hs, p.HeightMM), append(ws, p.WidthMM)
		}
		w2 := fl.Wmm * spd * pulseS / median(ws)
		h2 := fl.Hmm * gain * pulseMV / median(hs)
		if wk.trace != nil {
			wk.trace("sheet: flat pulses say %.1f × %.1f mm", w2, h2)
		}
		if math.Abs(w2/fl.Wmm-1) < 0.1 && math.Abs(h2/fl.Hmm-1) < 0.1 {
			if f2, ok := flattenSheet(pg, Qi, w2, h2, wk.trace); ok {
				fl = f2
			}
		}
	}
	res := sheetGeometry(fl, max(len(hs), len(fl.pulses)))
	how := "the perspective from the sheet's outline"
	if fl.paper {
		how = "the perspective and the sheet's height from its outline, a standard sheet"
	}
	res.Warnings = append(res.Warnings, fmt.Sprintf("no grid found: the scale comes from the calibration pulse, read as %.4g mm/mV at %.4g mm/s, and %s (%.1f × %.1f mm)", gain, spd, how, fl.Wmm, fl.Hmm))
	res.Pulses = fl.pulses
	res.GainMMPerMV, res.SpeedMMPerS = gain, spd
	if len(fl.pulses) > 0 {
		var ws []string
		res.GainMMPerMV, res.SpeedMMPerS, res.SpeedFrom, ws = settleSettings(fl.pulses, opt)
		res.Warnings = append(res.Warnings, ws...)
	}
	return res, true
}

// flatSheet is a photographed sheet resampled flat at s px/mm.
type flatSheet struct {
	Wmm, Hmm float64 // the sheet's size
	paper    bool    // snapped to a standard sheet
	s        float64
	Hf       mat3 // sheet mm → image px
	rect     *image.NRGBA
	ink      *image.Gray
	pulses   []Pulse // found on the flat page, in mm
}

// flattenSheet resamples the sheet whose outline maps to the unit square
// by Qi (unit square → image px) at w × h mm, snapped to a standard sheet
// when one is near, and finds its pulses again.
func flattenSheet(pg *Page, Qi mat3, w, h float64, trace func(format string, a ...any)) (flatSheet, bool) {
	fl := flatSheet{Wmm: w, Hmm: h}
	if sw, sh, ok := snapPaper(w, h); ok {
		fl.Wmm, fl.Hmm, fl.paper = sw, sh, true
	}
	fl.Hf = Qi.mul(mat3{1 / fl.Wmm, 0, 0, 0, 1 / fl.Hmm, 0, 0, 0, 1})
	ex, ey := jacobian(fl.Hf, fl.Wmm/2, fl.Hmm/2)
	s := math.Min(math.Max(math.Hypot(ex[0], ex[1]), math.Hypot(ey[0], ey[1])), maxRectPxPerMM)
	s = math.Max(s, 2)
	fl.s = s
	W, H := int(math.Ceil(fl.Wmm*s)), int(math.Ceil(fl.Hmm*s))
	rect, err := warpPage(pg.Image, fl.Hf.mul(mat3{1 / s, 0, 0, 0, 1 / s, 0, 0, 0, 1}), W, H)
	if err != nil {
		return fl, false
	}
	fl.rect = rect
	fl.ink, _ = inkMap(rect, gridLines{s: s})
	if !inkPlausible(fl.ink) {
		return fl, false
	}
	ps := findPulses(fl.ink, s, s, inkThreshold(fl.ink, fl.ink.Rect), false)
	for i := range ps {
		ps[i].HeightMM /= s
		ps[i].WidthMM /= s
		if trace != nil {
			trace("sheet: flat pulse %.3f × %.3f mm at %v", ps[i].HeightMM, ps[i].WidthMM, ps[i].Box)
		}
	}
	fl.pulses = ps
	return fl, true
}

// snapPaper matches a sheet measured at w × h mm to a standard size
// (paperSizes, either way up). The width comes from the pulses' widths,
// centre to centre of their sides, and is good to about 1 %; the height,
// from their heights, suffers the strokes' thickness and blur and is good
// to a few per cent, so a standard sheet of that width fixes the height
// better than the pulses do.
func snapPaper(w, h float64) (float64, float64, bool) {
	best, bw, bh := math.Inf(1), 0.0, 0.0
	for _, ps := range paperSizes {
		for _, wh := range [][2]float64{{ps[0], ps[1]}, {ps[1], ps[0]}} {
			ew, eh := math.Abs(w/wh[0]-1), math.Abs(h/wh[1]-1)
			if ew > 0.02 || eh > 0.05 {
				continue
			}
			if e := ew/0.01 + eh/0.03; e < best {
				best, bw, bh = e, wh[0], wh[1]
			}
		}
	}
	return bw, bh, bw > 0
}

// fromSheetOnly calibrates a photographed sheet with no grid, and no pulse
// read on the slanted picture, from its outline: flattened as the standard
// sheet its outline looks most like, its pulses stand upright and are read
// again; without any, the sheet's size gives the scale (Source "page").
func fromSheetOnly(pg *Page, wk *work, quad [4][2]float64, opt Options) (*Result, bool) {
	full := w2f(wk.k)
	var qf [4][2]float64
	for i, c := range quad {
		qf[i][0], qf[i][1] = full.apply(c[0], c[1])
	}
	Q, ok := quadToSquare(qf)
	if !ok {
		return nil, false
	}
	Qi, ok := Q.inv()
	if !ok {
		return nil, false
	}
	dist := func(a, b [2]float64) float64 { return math.Hypot(a[0]-b[0], a[1]-b[1]) }
	aspect := (dist(qf[0], qf[1]) + dist(qf[3], qf[2])) / (dist(qf[0], qf[3]) + dist(qf[1], qf[2]))
	// The standard sheet, either way up, nearest in aspect.
	W0, H0, best := 0.0, 0.0, math.Inf(1)
	for _, ps := range paperSizes {
		for _, wh := range [][2]float64{{ps[0], ps[1]}, {ps[1], ps[0]}} {
			if e := math.Abs(math.Log(aspect * wh[1] / wh[0])); e < best {
				W0, H0, best = wh[0], wh[1], e
			}
		}
	}
	if best > 0.15 {
		return nil, false // no sheet of a standard size seen at a moderate slant
	}
	fl, ok := flattenSheet(pg, Qi, W0, H0, wk.trace)
	if !ok {
		return nil, false
	}
	var hs, ws []float64
	for _, p := range fl.pulses {
		hs, ws = append(hs, p.HeightMM), append(ws, p.WidthMM)
	}
	if len(hs) > 0 {
		// The flattened page's millimetres are right to the paper guess's
		// error (under 10 %), and standard gains and speeds lie twofold
		// apart: the pulses' settings are plain to read.
		g, okG := snap(median(hs)/pulseMV, stdGains, 0.12)
		sp, okS := snap(median(ws)/pulseS, stdSpeeds, 0.12)
		if okG && okS {
			w2, h2 := fl.Wmm*sp*pulseS/median(ws), fl.Hmm*g*pulseMV/median(hs)
			if wk.trace != nil {
				wk.trace("sheet only: aspect %.3f, %v × %v mm; pulses say %.4g mm/mV %.4g mm/s, %.1f × %.1f mm", aspect, W0, H0, g, sp, w2, h2)
			}
			// The pulses may only refine the sheet guessed from its
			// outline (A4 or Letter, the outline's aspect a little off
			// under perspective); a reading far from it is no pulse.
			near := func(r float64) bool { return r > 0.88 && r < 1.14 }
			if near(w2/W0) && near(h2/H0) {
				if f2, ok := flattenSheet(pg, Qi, w2, h2, wk.trace); ok {
					res := sheetResult(f2, max(len(hs), len(f2.pulses)), opt)
					res.Warnings = append([]string{fmt.Sprintf("no grid found: the scale comes from the calibration pulse, read as %.4g mm/mV at %.4g mm/s, and the perspective from the sheet's outline (%.1f × %.1f mm)", g, sp, f2.Wmm, f2.Hmm)}, res.Warnings...)
					return res, true
				}
			}
		}
	}
	if opt.UserPxPerMM > 0 || opt.UserDPI > 0 {
		return nil, false // the scale given by hand is the better witness
	}
	fl.pulses = nil // what was found fits no pulse at this sheet's size
	res := sheetResult(fl, 0, opt)
	res.Source, res.Confidence = "page", 0.2
	res.Warnings = append([]string{fmt.Sprintf("no grid or calibration pulse found: the scale assumes the sheet is a whole %.0f × %.0f mm sheet (its outline's shape), with the perspective from its outline; check it against a known distance", W0, H0)}, res.Warnings...)
	return res, true
}

// sheetResult fills a Result from a flattened sheet: its geometry
// (sheetGeometry) and the settings from the pulses on it.
func sheetResult(fl flatSheet, n int, opt Options) *Result {
	res := sheetGeometry(fl, n)
	res.Pulses = fl.pulses
	res.GainMMPerMV, res.SpeedMMPerS, res.SpeedFrom, res.Warnings = appendSettings(res.Warnings, fl.pulses, opt)
	return res
}

// sheetGeometry fills a Result's page and geometry from a flattened
// sheet: the scale and skew at the middle of the tracing, and a
// confidence from the n pulses that agree with it (more for a standard
// sheet's size).
func sheetGeometry(fl flatSheet, n int) *Result {
	s, Hf := fl.s, fl.Hf
	X, Y := fl.Wmm/2, fl.Hmm/2
	if mx, my, ok := inkMiddle(fl.ink, fl.ink.Rect.Inset(int(3*s))); ok {
		X, Y = mx/s, my/s
	}
	ex, ey := jacobian(Hf, X, Y)
	ax, ay := Hf.apply(X, Y)
	res := &Result{
		Rectified: fl.rect, Ink: fl.ink, PxPerMM: s,
		PxPerMMX: math.Hypot(ex[0], ex[1]), PxPerMMY: math.Hypot(ey[0], ey[1]),
		RotationDeg: -math.Atan2(ex[1], ex[0]) * 180 / math.Pi,
		Source:      "pulse", RectToImage: Hf.mul(mat3{1 / s, 0, 0, 0, 1 / s, 0, 0, 0, 1}), ScaleAt: [2]float64{ax, ay},
		Confidence: math.Min(0.6, 0.3+0.1*float64(n)),
	}
	if fl.paper {
		res.Confidence = math.Min(0.75, res.Confidence+0.15)
	}
	return res
}

// sheetFrame is the flat frame of the sheet outlined by q (work px): M
// maps its W×H px, the sheet's mean side lengths, to work px.
func sheetFrame(q [4][2]float64, wk *work) (M mat3, W, H int, ok bool) {
	Q, ok := quadToSquare(q)
	if !ok {
		return M, 0, 0, false
	}
	Qi, ok := Q.inv()
	if !ok {
		return M, 0, 0, false
	}
	dist := func(a, b [2]float64) float64 { return math.Hypot(a[0]-b[0], a[1]-b[1]) }
	w := (dist(q[0], q[1]) + dist(q[3], q[2])) / 2
	h := (dist(q[0], q[3]) + dist(q[1], q[2])) / 2
	// A strip of paper seen from afar is short across: resampled finer,
	// so that the grid search has room for its tiles.
	if up := 256 / min(w, h); up > 1 && up < 2.5 {
		w, h = w*up, h*up
	}
	W, H = int(w), int(h)
	if W < 256 || H < 256 || W*H > 3*wk.w*wk.h {
		return M, 0, 0, false
	}
	return Qi.mul(mat3{1 / float64(W), 0, 0, 0, 1 / float64(H), 0, 0, 0, 1}), W, H, true
}

// standardSide says whether a length (mm) is within 4 % of a side of a
// standard sheet (paperSizes).
func standardSide(mm float64) bool {
	for _, ps := range paperSizes {
		for _, side := range ps {
			if math.Abs(mm/side-1) <= 0.04 {
				return true
			}
		}
	}
	return false
}
