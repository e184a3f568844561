package calib

import (
	"context"
	"errors"
	"fmt"
	"image"
	"math"
	"sort"
)

const maxRectPxPerMM = 12 // cap of the rectified scale (speed); ~300 dpi

// Detect finds the paper, its grid and scale, the page's turn and skew and
// the calibration pulses, and returns the page rectified at an isotropic
// scale with its ink map. See Result for the fields.
func Detect(ctx context.Context, pg *Page, opt Options) (*Result, error) {
	if pg == nil || pg.Image == nil {
		return nil, fmt.Errorf("calib: no page given: %w", ErrFormat)
	}
	if err := checkOptions(opt); err != nil {
		return nil, err
	}
	src := pg.Image
	b := src.Bounds()
	if b.Dx() < 32 || b.Dy() < 32 {
		return nil, fmt.Errorf("calib: %s is %d×%d pixels, too small to hold an ECG: %w", stem(pg.Path), b.Dx(), b.Dy(), ErrNotECG)
	}
	k := workScale(b)
	wk := makeWork(src, k)
	wk.trace = opt.Trace
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	ests := gridAngles(wk, 1)
	if ests[0].coh < 0.3 {
		ests = gridAngles(wk, 3)
	}
	var gm gridModel
	found := false
	if !opt.ForceUser {
		// The angle read over all periods first; when its grid fits
		// poorly, the one read over the coarser periods too, and the
		// better fit is kept.
		for i, e := range ests {
			if i > 0 && (math.Abs(e.theta-ests[0].theta) < 0.05*math.Pi/180 || (found && gm.rmsMM < 0.05)) {
				break
			}
			g, ok := measureGrid(wk, e.theta)
			if ok && (g.perspTerms > 0.01 || g.rmsMM > 0.05) {
				g = secondPass(wk, g)
			}
			if wk.trace != nil {
				wk.trace("angle %.3f°: grid found %v, rms %.3f mm on %d tiles, perspective %.4f", e.theta*180/math.Pi, ok, g.rmsMM, g.tiles, g.perspTerms)
			}
			if ok && (!found || g.quality() > gm.quality()) {
				gm, found = g, true
			}
		}
	}
	if !found && !opt.ForceUser {
		// A photographed sheet seen at a steep slant (a strip on a table):
		// its grid's period runs from fine to coarse across the picture
		// and no tile agrees with the next. Flattened by the sheet's
		// outline, the lines run evenly and the grid is measured there.
		if g, ok := sheetGrid(wk); ok {
			gm, found = g, true
		}
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	if found && gm.rmsMM > 0.1 {
		// A grid that fits poorly (few tiles, crowded traces) on a
		// photographed sheet: flattened by the sheet's outline, its lines
		// run straight and may be measured better.
		if q, ok := sheetQuad(wk); ok {
			if M, W, H, ok := sheetFrame(q, wk); ok {
				g2 := remeasure(wk, gm, M, W, H)
				if wk.trace != nil {
					wk.trace("sheet frame: rms %.3f → %.3f mm", gm.rmsMM, g2.rmsMM)
				}
				gm = g2
			}
		}
	}
	if found {
		return looked(pg)(fromGrid(ctx, pg, wk, gm, opt))
	}
	// No grid: the traces' own direction deskews the page (their long
	// baselines stand out in the 2-D spectrum as a grid's lines do).
	theta, coh := gridAngle(wk, 3)
	if coh < 0.2 {
		if t2, c2 := coarseAngle(wk); c2 >= 0.1 {
			theta = t2
		} else {
			theta = 0
		}
	}
	if wk.trace != nil {
		wk.trace("no grid: theta %.3f° coherence %.2f", theta*180/math.Pi, coh)
	}
	return looked(pg)(withoutGrid(ctx, pg, wk, theta, opt))
}

// looked returns a function that marks a result whose picture is bilevel
// (a fax: nearly every pixel black or white), for the uncertainty of the
// measurements taken from it.
func looked(pg *Page) func(*Result, error) (*Result, error) {
	return func(res *Result, err error) (*Result, error) {
		if res != nil {
			res.Bilevel, _ = pageLook(pg.Image)
		}
		return res, err
	}
}

// sheetGrid finds the grid on the work image flattened by the sheet's
// outline; the model returned maps mm to work px like any other.
func sheetGrid(wk *work) (gridModel, bool) {
	q, ok := sheetQuad(wk)
	if !ok {
		return gridModel{}, false
	}
	M, W, H, ok := sheetFrame(q, wk)
	if !ok {
		return gridModel{}, false
	}
	g, ok := measureFlat(wk, M, W, H)
	if wk.trace != nil {
		wk.trace("sheet grid: %d×%d flat, grid found %v, rms %.3f mm on %d tiles", W, H, ok, g.rmsMM, g.tiles)
	}
	if !ok {
		return gridModel{}, false
	}
	g.sheet = &q
	return g, true
}

// measureFlat measures the grid on the work image resampled through M
// (flat px → work px) at W×H and returns the model composed with M, so
// that it maps mm to work px.
func measureFlat(wk *work, M mat3, W, H int) (gridModel, bool) {
	dmin, err1 := warpPlane(wk.dmin, wk.w, wk.h, M, W, H)
	dmax, err2 := warpPlane(wk.dmax, wk.w, wk.h, M, W, H)
	if err1 != nil || err2 != nil {
		return gridModel{}, false
	}
	g, ok := measureGrid(&work{w: W, h: H, k: wk.k, dmin: dmin, dmax: dmax, trace: wk.trace}, 0)
	if !ok {
		return g, false
	}
	g.H = M.mul(g.H)
	g.perspTerms = math.Hypot(g.H[6]*(g.X1-g.X0), g.H[7]*(g.Y1-g.Y0))
	return g, true
}

// clearOffSheet blanks the ink outside the sheet's outline, brought in by
// margin px: the edge between a sheet and the table behind it is a long
// straight line that reads as a trace. q is in the ink map's own px.
func clearOffSheet(ink *image.Gray, q [4][2]float64, margin float64) {
	sign := 1.0
	if quadArea(q) < 0 {
		sign = -1
	}
	type edge struct{ nx, ny, c float64 } // inside where nx·x + ny·y + c ≥ 0
	var es [4]edge
	for i := range q {
		a, b := q[i], q[(i+1)%4]
		dx, dy := b[0]-a[0], b[1]-a[1]
		l := math.Hypot(dx, dy)
		if l == 0 {
			return
		}
		// Clockwise on the picture (y down): the inside lies to the right
		// of each edge, at (−dy, dx).
		nx, ny := -dy/l*sign, dx/l*sign
		es[i] = edge{nx, ny, -(nx*a[0] + ny*a[1]) - margin}
	}
	b := ink.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		row := ink.Pix[(y-b.Min.Y)*ink.Stride:]
		for x := b.Min.X; x < b.Max.X; x++ {
			for _, e := range es {
				if e.nx*float64(x)+e.ny*float64(y)+e.c < 0 {
					row[x-b.Min.X] = 0
					break
				}
			}
		}
	}
}

// secondPass measures the grid again on the work image resampled through
// the first model (a photo seen at a slant: in the flattened frame every
// tile's lines run straight, so their phase is sharp) and composes the two
// models; it keeps the first when the second fits worse.
func secondPass(wk *work, gm gridModel) gridModel {
	ex, ey := jacobian(gm.H, (gm.X0+gm.X1)/2, (gm.Y0+gm.Y1)/2)
	sw := (math.Hypot(ex[0], ex[1]) + math.Hypot(ey[0], ey[1])) / 2
	W, H := int((gm.X1-gm.X0)*sw), int((gm.Y1-gm.Y0)*sw)
	if W < 256 || H < 256 || W*H > 3*wk.w*wk.h {
		return gm
	}
	M := gm.H.mul(mat3{1 / sw, 0, gm.X0, 0, 1 / sw, gm.Y0, 0, 0, 1}) // flat px → work px
	return remeasure(wk, gm, M, W, H)
}

// remeasure measures the grid on the work image resampled to W×H through
// M (flat px → work px), where the grid's lines should run straight, and
// keeps that model when it fits better than gm and confirms its scale.
func remeasure(wk *work, gm gridModel, M mat3, W, H int) gridModel {
	g2, ok := measureFlat(wk, M, W, H)
	if !ok || g2.quality() <= gm.quality() {
		return gm
	}
	// The flattened frame must confirm the first scale (a 1 mm / 5 mm mix-up
	// fits as well as the truth).
	fx, fy := jacobian(g2.H, (g2.X0+g2.X1)/2, (g2.Y0+g2.Y1)/2)
	ex, ey := jacobian(gm.H, (gm.X0+gm.X1)/2, (gm.Y0+gm.Y1)/2)
	rx := math.Hypot(fx[0], fx[1]) / math.Hypot(ex[0], ex[1])
	ry := math.Hypot(fy[0], fy[1]) / math.Hypot(ey[0], ey[1])
	// Unless the first model hardly fits at all (a harmonic taken for the
	// 5 mm period, one axis lost) and the flattened frame fits closely:
	// then the second scale is the one to believe, but for a fivefold
	// ratio (the 1 mm / 5 mm question, which a close fit cannot settle).
	poorFirst := gm.rmsMM > 0.15 && g2.rmsMM < 0.05
	fivefold := func(r float64) bool { return (r > 4 && r < 6) || (r > 1.0/6 && r < 0.25) }
	agree := func(r float64) bool { return math.Abs(r-1) <= 0.15 || (poorFirst && !fivefold(r)) }
	if wk.trace != nil {
		wk.trace("remeasured: rms %.3f → %.3f mm, scale ratio %.3f × %.3f", gm.rmsMM, g2.rmsMM, rx, ry)
	}
	if !agree(rx) || !agree(ry) {
		return gm
	}
	return g2
}

func checkOptions(opt Options) error {
	for _, v := range []float64{opt.UserPxPerMM, opt.UserDPI, opt.StatedGainMMPerMV, opt.StatedSpeedMMPerS} {
		if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
			return fmt.Errorf("calib: options must be finite and not negative (got %v)", v)
		}
	}
	if opt.ForceUser && opt.UserPxPerMM == 0 && opt.UserDPI == 0 {
		return errors.New("calib: a hand-given scale was forced but none was given (set UserPxPerMM or UserDPI)")
	}
	return nil
}

// w2f maps work px to full-image px (box downsampling by k: work pixel i
// covers source pixels k·i … k·i+k-1).
func w2f(k int) mat3 {
	o := float64(k-1) / 2
	return mat3{float64(k), 0, o, 0, float64(k), o, 0, 0, 1}
}

// turnMap maps upright page mm (X', Y') to grid-frame mm (X, Y) for q
// counter-clockwise quarter turns applied to the grid frame, over the
// extent [x0,x1]×[y0,y1].
func turnMap(q int, x0, x1, y0, y1 float64) mat3 {
	switch q & 3 {
	case 1:
		return mat3{0, -1, x1, 1, 0, y0, 0, 0, 1}
	case 2:
		return mat3{-1, 0, x1, 0, -1, y1, 0, 0, 1}
	case 3:
		return mat3{0, 1, x0, -1, 0, y1, 0, 0, 1}
	}
	return mat3{1, 0, x0, 0, 1, y0, 0, 0, 1}
}

func fromGrid(ctx context.Context, pg *Page, wk *work, gm gridModel, opt Options) (*Result, error) {
	full := w2f(wk.k)
	Hf := full.mul(gm.H) // paper mm → full px
	// Scale and skew at the middle of the measured grid.
	cx, cy := (gm.X0+gm.X1)/2, (gm.Y0+gm.Y1)/2
	ex, ey := jacobian(Hf, cx, cy)
	ppx, ppy := math.Hypot(ex[0], ex[1]), math.Hypot(ey[0], ey[1])
	rot := -math.Atan2(ex[1], ex[0]) * 180 / math.Pi

	// Extent: the measured grid, within the image's own outline.
	inv, ok := Hf.inv()
	if !ok {
		return nil, fmt.Errorf("calib: %s: grid geometry is degenerate: %w", stem(pg.Path), ErrNotECG)
	}
	b := pg.Image.Bounds()
	var xs, ys []float64
	for _, p := range [][2]float64{{0, 0}, {float64(b.Dx() - 1), 0}, {0, float64(b.Dy() - 1)}, {float64(b.Dx() - 1), float64(b.Dy() - 1)}} {
		X, Y := inv.apply(p[0], p[1])
		xs, ys = append(xs, X), append(ys, Y)
	}
	ix0, ix1 := minMax(xs)
	iy0, iy1 := minMax(ys)
	X0, X1, Y0, Y1 := cropExtent(Hf, gm, ix0, ix1, iy0, iy1)
	if gm.perspTerms < 0.02 {
		// A flat scan: keep the whole picture.
		X0, X1, Y0, Y1 = ix0, ix1, iy0, iy1
	}
	// Snap to whole 5 mm so grid lines fall on whole multiples of s.
	X0, Y0 = math.Floor(X0/5)*5, math.Floor(Y0/5)*5
	X1, Y1 = math.Ceil(X1/5)*5, math.Ceil(Y1/5)*5
	if X1-X0 < 10 || Y1-Y0 < 10 {
		return nil, fmt.Errorf("calib: %s: the grid covers too little of the picture: %w", stem(pg.Path), ErrNotECG)
	}

	T := turnMap(0, X0, X1, Y0, Y1)
	wmm, hmm := X1-X0, Y1-Y0
	s := math.Min(math.Max(ppx, ppy), maxRectPxPerMM)
	s = math.Max(s, 2)
	W, Hh := int(math.Ceil(wmm*s)), int(math.Ceil(hmm*s))
	if int64(W)*int64(Hh) > 80e6 {
		return nil, fmt.Errorf("calib: %s: the rectified page would be %d×%d px; the grid geometry is implausible: %w", stem(pg.Path), W, Hh, ErrNotECG)
	}
	R := mat3{1 / s, 0, 0, 0, 1 / s, 0, 0, 0, 1} // rect px → upright mm
	M := Hf.mul(T).mul(R)
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	rect, err := warpPage(pg.Image, M, W, Hh)
	if err != nil {
		return nil, fmt.Errorf("calib: %s: resampling failed: %v", stem(pg.Path), err)
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	// Grid lines in the rectified frame lie at whole mm (extent snapped).
	ink, paperBox := inkMap(rect, gridLines{known: true, s: s})
	if gm.sheet != nil {
		if Mi, ok := M.inv(); ok {
			var qr [4][2]float64
			for i, c := range gm.sheet {
				fx, fy := full.apply(c[0], c[1])
				qr[i][0], qr[i][1] = Mi.apply(fx, fy)
			}
			clearOffSheet(ink, qr, 1.5*s)
		}
	}
	ink0 := ink
	// The turn is judged well inside the measured grid: a photographed
	// sheet's edges are long straight lines in the ink map that read as
	// traces.
	gr := image.Rect(int((gm.X0-X0)*s), int((gm.Y0-Y0)*s), int((gm.X1-X0)*s), int((gm.Y1-Y0)*s))
	gr = gr.Inset(min(gr.Dx(), gr.Dy()) / 10).Intersect(paperBox.Inset(int(3 * s)))
	if gr.Dx()*gr.Dy() < W*Hh/4 {
		gr = image.Rect(0, 0, W, Hh) // too little grid to judge by
	}
	if wk.trace != nil {
		wk.trace("turn: rect %d×%d paper box %v grid %v ink threshold %d", W, Hh, paperBox, gr, inkThreshold(ink, gr))
	}
	// When the grid covers only part of the sheet the crop may hold too
	// few rows: both views must agree before a page is turned.
	thr := inkThreshold(ink, gr)
	pool := poolInk(ink, s, thr)
	pool.trace = wk.trace
	bs := pool.bs
	q, turnConf := pool.decide(image.Rect(gr.Min.X/bs, gr.Min.Y/bs, gr.Max.X/bs, gr.Max.Y/bs))
	if qf, _ := pool.decide(image.Rect(0, 0, pool.w, pool.h)); qf != q {
		if wk.trace != nil {
			wk.trace("turn: %d inside the grid, %d over the whole page", q, qf)
		}
		switch {
		case q == 0 || qf == 0 || q&1 != qf&1:
			// One view keeps the page as it is, or they disagree even on
			// which way the traces run: turning is rare, so it stays.
			q, turnConf = 0, math.Min(turnConf, 0.2)
		default:
			turnConf = math.Min(turnConf, 0.3) // sideways: the pulses pick the side
		}
	}
	// The calibration pulses stand upright (a step up from the baseline)
	// only on an upright page: a second opinion on the turn.
	upPs := findPulses(ink, s, s, thr, false)
	up := len(upPs)
	count := func(q int) int { return len(findPulses(turnGray(ink, q), s, s, thr, false)) }
	switch {
	case q == 2:
		// Upside down is rare.
		if down := count(2); down <= up && !(up == 0 && turnConf > 0.9) {
			q, turnConf = 0, 0.2
		}
	case q != 0:
		// A page on its side. Twelve leads recorded at once (12x1) with
		// tall complexes line up their QRS from row to row and ink whole
		// columns, so the pulses may overrule the ink's direction.
		side, other := count(q), count(4-q)
		if wk.trace != nil {
			wk.trace("turn: %d pulses upright, %d after turning %d, %d the other way", up, side, q, other)
		}
		if other >= 2 && other > side {
			q, side = 4-q, other
		}
		if up >= 2 && up > side {
			q, turnConf = 0, 0.25
		} else if up > 0 && up >= side {
			turnConf = math.Min(turnConf, 0.25)
		}
	case up == 0 && turnConf < 0.8:
		// Upright by the ink's direction, not clearly, and no upright
		// pulse: a page on its side shows its pulses after the turn.
		s1, s3 := count(1), count(3)
		if wk.trace != nil {
			wk.trace("turn: no upright pulse; %d after one turn, %d after three", s1, s3)
		}
		if max(s1, s3) >= 2 && s1 != s3 {
			q, turnConf = 1, 0.4
			if s3 > s1 {
				q = 3
			}
		}
	}
	if q != 0 {
		P := turnMat(q, W, Hh)
		rect, ink = turnNRGBA(rect, q), turnGray(ink, q)
		M = M.mul(P)
	}
	// Report the scale and skew at the middle of the tracing (the ink's
	// centroid on the paper, away from the page's edges): under
	// perspective the scale changes across the page.
	ax, ay := Hf.apply(cx, cy)
	at := [2]float64{ax, ay}
	inner := paperBox.Inset(int(3 * s))
	if cxr, cyr, ok := inkMiddle(ink0, inner); ok {
		// Measured before any turn: map through the unturned frame.
		T0 := turnMap(0, X0, X1, Y0, Y1)
		X, Y := T0.mul(R).apply(cxr, cyr)
		ax, ay := Hf.apply(X, Y)
		at = [2]float64{ax, ay}
		ex, ey = jacobian(Hf, X, Y)
		ppx, ppy = math.Hypot(ex[0], ex[1]), math.Hypot(ey[0], ey[1])
		rot = -math.Atan2(ex[1], ex[0]) * 180 / math.Pi
		if q&1 == 1 {
			ppx, ppy = ppy, ppx
		}
	}
	res := &Result{
		Rectified: rect, Ink: ink, PxPerMM: s,
		PxPerMMX: ppx, PxPerMMY: ppy, RotationDeg: rot, Turned: q,
		Source: "grid", RectToImage: M, ScaleAt: at,
	}
	res.Confidence = gm.conf * (0.6 + 0.4*turnConf)
	if gm.perspTerms > 0.02 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("perspective corrected (%.0f%% scale change across the page)", 100*gm.perspTerms))
	}
	if gm.rmsMM > 0.3 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("grid fits the flat-page model only to %.2f mm; bent or wavy paper", gm.rmsMM))
	}
	if turnConf < 0.3 {
		res.Warnings = append(res.Warnings, "page orientation is uncertain; check that the traces read left to right")
	}
	if !inkPlausible(ink) {
		return nil, fmt.Errorf("calib: %s: a grid but no traces: %w", stem(pg.Path), ErrNotECG)
	}
	ps := upPs
	if q != 0 {
		ps = findPulses(ink, s, s, thr, false)
	}
	for i := range ps {
		ps[i].HeightMM /= s
		ps[i].WidthMM /= s
	}
	res.Pulses = ps
	res.GainMMPerMV, res.SpeedMMPerS, res.SpeedFrom, res.Warnings = appendSettings(res.Warnings, ps, opt)
	checkHint(pg, res)
	return res, nil
}

// cropExtent is the paper extent (mm) of the rectified page under
// perspective: the measured grid and a margin around it, within the
// picture. Tiles that the picture's edge or a shadow cuts are not measured,
// so the grid found may stop well short of the sheet's edge while the
// traces go on; the margin reaches as far as the model stays sound (its
// scale within a factor of two of the middle's; beyond, the fit is
// extrapolated too far to trust).
func cropExtent(Hf mat3, gm gridModel, ix0, ix1, iy0, iy1 float64) (X0, X1, Y0, Y1 float64) {
	span := math.Max(gm.X1-gm.X0, gm.Y1-gm.Y0)
	cx, cy := (gm.X0+gm.X1)/2, (gm.Y0+gm.Y1)/2
	ex, ey := jacobian(Hf, cx, cy)
	s0 := math.Hypot(ex[0], ex[1]) + math.Hypot(ey[0], ey[1])
	sound := func(X, Y float64) bool {
		ex, ey := jacobian(Hf, X, Y)
		s := math.Hypot(ex[0], ex[1]) + math.Hypot(ey[0], ey[1])
		d := Hf[6]*X + Hf[7]*Y + Hf[8]
		d0 := Hf[6]*cx + Hf[7]*cy + Hf[8]
		return d*d0 > 0 && s < 2*s0 && s > s0/2
	}
	m := 0.1 * span
	for _, f := range []float64{0.4, 0.25} {
		M := f * span
		if sound(gm.X0-M, gm.Y0-M) && sound(gm.X1+M, gm.Y0-M) && sound(gm.X0-M, gm.Y1+M) && sound(gm.X1+M, gm.Y1+M) {
			m = M
			break
		}
	}
	X0, X1 = math.Max(ix0, gm.X0-m), math.Min(ix1, gm.X1+m)
	Y0, Y1 = math.Max(iy0, gm.Y0-m), math.Min(iy1, gm.Y1+m)
	return
}

func appendSettings(w []string, ps []Pulse, opt Options) (float64, float64, string, []string) {
	g, sp, from, ws := settleSettings(ps, opt)
	return g, sp, from, append(w, ws...)
}

// checkHint compares the file's stated resolution with the grid's.
func checkHint(pg *Page, res *Result) {
	if pg.DPIX <= 0 || pg.DPIY <= 0 {
		return
	}
	dx, dy := pg.DPIX/25.4, pg.DPIY/25.4
	if res.Turned&1 == 1 {
		dx, dy = dy, dx
	}
	if math.Abs(res.PxPerMMX/dx-1) > 0.03 || math.Abs(res.PxPerMMY/dy-1) > 0.03 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("the file states %.0f×%.0f dpi but the grid measures %.1f×%.1f dpi (the grid is used)",
			pg.DPIX, pg.DPIY, res.PxPerMMX*25.4, res.PxPerMMY*25.4))
	}
}

// inkMiddle is the middle of the tracing in r (rect px): across, the
// midpoint between the 2nd and 98th percentiles of the strong ink's
// columns (the traces run from one side of their panels to the other);
// down, the mean of its rows leaving out a tenth at each end (the rows of
// traces are alike, and a single row's baseline is its middle, whatever
// title stands above). A plain mean would lean toward a title, a crease
// or a piece of the sheet's edge.
func inkMiddle(ink *image.Gray, r image.Rectangle) (float64, float64, bool) {
	r = r.Intersect(ink.Rect)
	if r.Empty() {
		return 0, 0, false
	}
	cols := make([]int, r.Dx())
	rows := make([]int, r.Dy())
	n := 0
	for y := r.Min.Y; y < r.Max.Y; y += 2 {
		row := ink.Pix[y*ink.Stride : y*ink.Stride+r.Max.X]
		for x := r.Min.X; x < len(row); x += 2 {
			if row[x] >= 128 {
				cols[x-r.Min.X]++
				rows[y-r.Min.Y]++
				n++
			}
		}
	}
	if n < 10 {
		return 0, 0, false
	}
	lo, hi := quantileIndex(cols, n, 0.02), quantileIndex(cols, n, 0.98)
	return float64(r.Min.X) + float64(lo+hi)/2, float64(r.Min.Y) + trimmedMean(rows, n, 0.1), true
}

// trimmedMean is the mean index of histogram h (n counts in all) leaving
// out the fraction f at each end.
func trimmedMean(h []int, n int, f float64) float64 {
	lo, hi := f*float64(n), (1-f)*float64(n)
	var s, k, acc float64
	for i, c := range h {
		// The part of this bin's counts inside [lo, hi).
		a, b := math.Max(acc, lo), math.Min(acc+float64(c), hi)
		if b > a {
			s += float64(i) * (b - a)
			k += b - a
		}
		acc += float64(c)
	}
	if k == 0 {
		return float64(len(h)) / 2
	}
	return s / k
}

// quantileIndex is the first index of histogram h (n counts in all) at
// which the running count reaches fraction p of n.
func quantileIndex(h []int, n int, p float64) int {
	t, acc := int(math.Ceil(p*float64(n))), 0
	for i, c := range h {
		acc += c
		if acc >= t {
			return i
		}
	}
	return len(h) - 1
}

// inkPlausible rejects an ink map that is empty or mostly dark (noise).
func inkPlausible(ink *image.Gray) bool {
	var n, on int
	for y := 0; y < ink.Rect.Dy(); y += 3 {
		row := ink.Pix[y*ink.Stride : y*ink.Stride+ink.Rect.Dx()]
		for x := 0; x < len(row); x += 3 {
			n++
			if row[x] >= 128 {
				on++
			}
		}
	}
	if n == 0 {
		return false
	}
	f := float64(on) / float64(n)
	return f > 0.0003 && f < 0.15
}

// withoutGrid: the page is only deskewed by the traces' own direction and
// the scale comes from a calibration pulse or from the user.
func withoutGrid(ctx context.Context, pg *Page, wk *work, theta float64, opt Options) (*Result, error) {
	b := pg.Image.Bounds()
	W, H := float64(b.Dx()), float64(b.Dy())
	// Anisotropic pixels: from the file's resolution, else a landscape
	// page more than 2.2 times wider than tall is taken as a fax at
	// 200 × 100 dpi (a normal-resolution fax, from memory).
	aniso := 1.0
	switch {
	case pg.DPIX > 0 && pg.DPIY > 0:
		aniso = pg.DPIX / pg.DPIY
	case W/H > 2.2 && W/H < 3.4:
		aniso = 2
	}
	if aniso < 0.2 || aniso > 5 {
		aniso = 1
	}
	if t, ok := profileAngle(wk, aniso, 10); ok {
		if wk.trace != nil {
			wk.trace("no grid: profile angle %.3f° (spectrum %.3f°)", t*180/math.Pi, theta*180/math.Pi)
		}
		theta = t
	}
	c, s := math.Cos(theta), math.Sin(theta)
	// Rect px → image px: undo the y stretch, then rotate about the centre.
	Wr, Hr := b.Dx(), int(math.Ceil(H*aniso))
	cxr, cyr := (float64(Wr)-1)/2, (float64(Hr)-1)/2
	cxi, cyi := (W-1)/2, (H-1)/2
	// Build it step by step for clarity: centre, rotate, squash, shift.
	toC := mat3{1, 0, -cxr, 0, 1, -cyr, 0, 0, 1}
	R := mat3{c, -s, 0, s, c, 0, 0, 0, 1}
	sq := mat3{1, 0, 0, 0, 1 / aniso, 0, 0, 0, 1}
	back := mat3{1, 0, cxi, 0, 1, cyi, 0, 0, 1}
	M := back.mul(sq).mul(R).mul(toC)
	if math.Abs(theta) < 1e-4 && aniso == 1 {
		M = ident
	}
	rect, err := warpPage(pg.Image, M, Wr, Hr)
	if err != nil {
		return nil, fmt.Errorf("calib: %s: resampling failed: %v", stem(pg.Path), err)
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	guess := math.Max(float64(Wr), float64(Hr)) / 280 // an A4/letter page seen landscape, about 280 mm wide
	ink, _ := inkMap(rect, gridLines{s: guess})
	if !inkPlausible(ink) {
		return nil, fmt.Errorf("calib: %s: no ECG grid or trace in this picture: %w", stem(pg.Path), ErrNotECG)
	}
	res := &Result{Rectified: rect, Ink: ink, RectToImage: M, RotationDeg: -math.Atan2(math.Sin(theta)/aniso, math.Cos(theta)) * 180 / math.Pi, // as seen in the (squashed) picture
		ScaleAt: [2]float64{cxi, cyi}}
	fileScale := 0.0
	if pg.DPIX > 0 && pg.DPIY > 0 {
		fileScale = pg.DPIX / 25.4 // rect x keeps the file's x resolution
		guess = fileScale          // a better prior for reading the pulse
	}
	// When the paper fills the picture (a fax, a flatbed scan of the whole
	// sheet), the picture's size over the paper's is a scale of its own.
	bilevel, paperBorder := pageLook(pg.Image)
	var pages []float64
	if bilevel || paperBorder {
		pages, _ = pagePrior(float64(Wr), float64(Hr), theta, 0.015)
	}
	if fileScale > 0 {
		pages = append([]float64{fileScale}, pages...)
	}
	user := opt.UserPxPerMM
	if user == 0 && opt.UserDPI > 0 {
		user = opt.UserDPI / 25.4
	}
	var ps []Pulse
	if !opt.ForceUser {
		lo, hi := guess/5, guess*2.5
		if len(pages) > 0 {
			lo, hi = math.Min(lo, pages[0]/1.3), math.Max(hi, pages[0]*1.3)
		}
		ps = findPulses(ink, lo, hi, inkThreshold(ink, ink.Rect), !bilevel && !paperBorder)
		g0 := guess
		if len(pages) > 0 {
			g0 = pages[0]
		}
		if len(pages) > 0 {
			// The sheet's size bounds what can be a pulse: 1 mV at 5 to
			// 20 mm/mV, 200 ms at 12.5 to 50 mm/s, with room for error.
			var keep []Pulse
			for _, p := range ps {
				hmm, wmm := p.HeightMM/pages[0], p.WidthMM/pages[0]
				if hmm >= 3.5 && hmm <= 45 && wmm >= 1.5 && wmm <= 13 {
					keep = append(keep, p)
				}
			}
			ps = keep
		}
		ps = consistentPulses(ps, g0, 10*pulseMV)
	}
	if wk.trace != nil {
		wk.trace("no grid: bilevel %v border %v pages %v (rect %d×%d, aniso %.2f) pulses %d guess %.3f", bilevel, paperBorder, pages, Wr, Hr, aniso, len(ps), guess)
	}
	if len(ps) == 0 && !bilevel && !paperBorder && !opt.ForceUser {
		// A photographed sheet whose outline shows: flattened, its pulses
		// stand upright (on the slanted picture they may lean past
		// reading), and its outline gives the scale failing them.
		if q, ok := sheetQuad(wk); ok {
			if r, ok := fromSheetOnly(pg, wk, q, opt); ok {
				return r, ctx.Err()
			}
		}
	}
	var fit scaleFit
	switch {
	case opt.ForceUser && user > 0:
		res.Source, res.PxPerMM, res.Confidence = "user", user, 0.5
	case user > 0 && len(ps) == 0:
		res.Source, res.PxPerMM, res.Confidence = "user", user, 0.5
		res.Warnings = append(res.Warnings, "no grid or calibration pulse found: the scale given by hand is used")
	case len(ps) > 0:
		hs := make([]float64, len(ps))
		ws := make([]float64, len(ps))
		for i, p := range ps {
			hs[i], ws[i] = p.HeightMM, p.WidthMM
		}
		h, w := median(hs), median(ws)
		// Edges found to about ±0.5 px each, in the picture's own pixels
		// (the height's are aniso rect px tall).
		n := math.Sqrt(float64(len(ps)))
		hErr := math.Max(0.012, 0.7*math.Max(1, aniso)/h/n)
		wErr := math.Max(0.012, 0.7/w/n)
		fit = fuseScale(h, w, hErr, wErr, pages, 0.01, guess, opt)
		if wk.trace != nil {
			wk.trace("pulse h %.2f w %.2f (±%.3f ±%.3f): %+v", h, w, hErr, wErr, fit)
		}
		if fit.paper < 0 && len(pages) > 0 && bilevel {
			// A fax whose "pulse" the sheet's size cannot explain at any
			// standard setting: the sheet is the better witness.
			res.Source, res.PxPerMM, res.Confidence = "page", pages[0], 0.25
			res.Warnings = append(res.Warnings, "no grid found, and what looks like a calibration pulse fits no standard setting at this sheet's size: the scale assumes the fax holds a whole A4 or Letter sheet; check it against a known distance")
			ps = nil
			break
		}
		res.PxPerMM = fit.s
		res.Source = "pulse"
		res.Confidence = math.Min(0.6, 0.3+0.1*float64(len(ps)))
		how := "its height and width"
		if fit.paper >= 0 {
			res.Confidence = math.Min(0.75, res.Confidence+0.15)
			how = "its height and width and the page's size"
			if fit.widthOff {
				how = "its height and the page's size; its width is no 200 ms pulse's"
			}
		}
		res.Warnings = append(res.Warnings, fmt.Sprintf("no grid found: the scale comes from the calibration pulse, read as %.4g mm/mV at %.4g mm/s (the standard settings that best explain %s)", fit.gain, fit.spd, how))
		if !bilevel && !paperBorder {
			// A picture of a sheet (a table or a lid around it): the pulse
			// is measured where it lies, and the sheet may be seen at a
			// slant, so its scale need not hold across the page.
			res.Confidence = math.Min(res.Confidence, 0.3)
			res.Warnings = append(res.Warnings, "the sheet does not fill the picture: if it was photographed at a slant, the pulse gives the scale only near the pulse")
		}
		if fit.paper < 0 && len(pages) > 0 {
			res.Confidence *= 0.6
			res.Warnings = append(res.Warnings, "the calibration pulse and the sheet's size disagree; the pulse is used")
		}
		if fit.margin < 3 {
			res.Confidence *= 0.5
			res.Warnings = append(res.Warnings, "the calibration pulse fits other standard settings almost as well: check the gain, the speed and the scale against the printed settings")
		}
	case user > 0:
		res.Source, res.PxPerMM, res.Confidence = "user", user, 0.5
		res.Warnings = append(res.Warnings, "no grid found: the scale given by hand is used")
	case fileScale > 0:
		res.Source, res.PxPerMM, res.Confidence = "file", fileScale, 0.4
		res.Warnings = append(res.Warnings, fmt.Sprintf("no grid found: the scale comes from the resolution the file states (%.0f×%.0f dpi)", pg.DPIX, pg.DPIY))
	case bilevel && len(pages) > 0:
		// A fax with neither grid nor pulse: the sheet fills the scan.
		res.Source, res.PxPerMM, res.Confidence = "page", pages[0], 0.25
		res.Warnings = append(res.Warnings, "no grid or calibration pulse found: the scale assumes the fax holds a whole A4 or Letter sheet; check it against a known distance")
	case paperBorder && len(pages) > 0:
		// A scan of a whole sheet of plain paper whose pulses cannot be
		// told apart (drawn into one another): its shape is that of a
		// standard sheet, which gives the scale.
		res.Source, res.PxPerMM, res.Confidence = "page", pages[0], 0.2
		res.Warnings = append(res.Warnings, "no grid or calibration pulse found: the scale assumes the scan holds a whole A4 or Letter sheet edge to edge; check it against a known distance")
	default:
		return nil, fmt.Errorf("calib: %s: %w", stem(pg.Path), ErrNoScale)
	}
	res.PxPerMMX, res.PxPerMMY = res.PxPerMM, res.PxPerMM/aniso
	if res.Source == "pulse" && !bilevel && !paperBorder && fit.gain > 0 && fit.spd > 0 {
		// A sheet whose outline shows: its perspective is known, and the
		// page is rectified from it.
		if q, ok := sheetQuad(wk); ok {
			r, ok := fromSheet(pg, wk, q, M, ps, fit.gain, fit.spd, opt)
			if !ok {
				// The pulses as read on the slanted picture make no
				// sheet: read them again on the flattened one.
				r, ok = fromSheetOnly(pg, wk, q, opt)
			}
			if ok {
				if wk.trace != nil {
					wk.trace("sheet %v: %s", q, r.Warnings[0])
				}
				return r, ctx.Err()
			}
		}
		// A sheet photographed at a slant is foreshortened more along one
		// axis than the other: where the pulses stand, their height gives
		// the scale across the traces and their width the scale along.
		// The scale changes across such a sheet, so it is read from one
		// pulse, the one of median height, and reported where it stands.
		order := make([]int, len(ps))
		for i := range order {
			order[i] = i
		}
		sort.Slice(order, func(a, b int) bool { return ps[order[a]].HeightMM < ps[order[b]].HeightMM })
		p := ps[order[(len(ps)-1)/2]]
		res.PxPerMMX = p.WidthMM / (fit.spd * pulseS)
		res.PxPerMMY = p.HeightMM / (fit.gain * pulseMV) / aniso
		x, y := M.apply((p.Box[0]+p.Box[2])/2, (p.Box[1]+p.Box[3])/2)
		res.ScaleAt = [2]float64{x, y}
	}
	if math.Abs(theta) > 0.25 {
		// The page lies across: the squash applies to the rotated frame only
		// approximately; the two scales are reported at the same value
		// ratio as the pixel aspect.
		res.Warnings = append(res.Warnings, "no grid: the scale per axis assumes the page is nearly straight")
	}
	for i := range ps {
		ps[i].HeightMM /= res.PxPerMM
		ps[i].WidthMM /= res.PxPerMM
	}
	res.Pulses = ps
	if res.Source == "pulse" {
		// The pulse's settings came with the scale.
		res.GainMMPerMV, res.SpeedMMPerS, res.SpeedFrom = fit.gain, fit.spd, SpeedPulse
	} else {
		res.GainMMPerMV, res.SpeedMMPerS, res.SpeedFrom, res.Warnings = appendSettings(res.Warnings, ps, opt)
	}
	return res, nil
}

// consistentPulses keeps the largest group of pulses of one height and
// width (the recorder draws the same pulse on every row, at the same x,
// mostly at the row's start), and only
// when that height gives a scale near the page-size guess (within 2.5×).
func consistentPulses(ps []Pulse, guess, gain float64) []Pulse {
	var best []Pulse
	bestScore := 0.0
	for _, p := range ps {
		var grp []Pulse
		xs := map[int]bool{}
		for _, q := range ps {
			if math.Abs(q.HeightMM/p.HeightMM-1) < 0.06 && math.Abs(q.WidthMM/p.WidthMM-1) < 0.2 && q.WidthMM > 0.15*q.HeightMM && q.WidthMM < 2*q.HeightMM {
				grp = append(grp, q)
				xs[int(q.Box[0]/(0.02*guess*280))] = true
			}
		}
		if len(grp) == 0 {
			continue
		}
		// More members, stacked at one x (one per row), and taller (text
		// glyphs are a few mm; a pulse is usually 10 mm) score higher.
		s := (float64(len(grp)) + float64(len(grp)-len(xs))) * math.Log(p.HeightMM)
		// Alike otherwise, the group further left: the pulses lead the rows.
		if len(best) == 0 || s > 1.05*bestScore || (s > bestScore/1.05 && medianLeft(grp) < medianLeft(best)) {
			best, bestScore = grp, s
		}
	}
	if len(best) == 0 {
		return nil
	}
	hs := make([]float64, len(best))
	for i, p := range best {
		hs[i] = p.HeightMM
	}
	ppm := median(hs) / gain
	if ppm < guess/5 || ppm > guess*5 {
		return nil
	}
	return best
}

// medianLeft is the median left edge of a group of pulses.
func medianLeft(ps []Pulse) float64 {
	xs := make([]float64, len(ps))
	for i, p := range ps {
		xs[i] = p.Box[0]
	}
	return median(xs)
}

// UserScaleFromPoints gives px/mm from two points a known distance apart
// (for instance two grid lines 50 mm apart picked on screen). It returns
// 0 when the points coincide or the distance is not positive.
func UserScaleFromPoints(x0, y0, x1, y1, mm float64) float64 {
	d := math.Hypot(x1-x0, y1-y0)
	if !(mm > 0) || !(d > 0) || math.IsInf(d, 0) || math.IsInf(mm, 0) {
		return 0
	}
	return d / mm
}
