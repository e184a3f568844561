package calib

import (
	"context"
	"errors"
	"fmt"
	"image"
	"math"
)

const maxRectPxPerMM = 12 // cap of the rectified scale (speed); ~300 dpi

// Detect finds the paper, its grid and scale, the page's turn and skew and
// the calibration pulses, and returns the page rectified at an isotropic
// scale with its ink map. See Result for the fields.
func Detect(ctx context.Context, pg *Page, opt Options) (*Result, error) {
	res, err := detect(ctx, pg, opt)
	if err == nil && res != nil && res.GainFrom == "" {
		res.GainFrom = gainFrom(res.Pulses, opt)
	}
	return res, err
}

// gainFrom says where settleSettings' gain came from: a pulse of a
// standard height, the caller's word, or nothing.
func gainFrom(ps []Pulse, opt Options) string {
	if _, _, _, ok := pulseGain(ps); ok && len(ps) > 0 {
		return GainPulse
	}
	if opt.StatedGainMMPerMV > 0 {
		return GainStated
	}
	return GainAssumed
}

func detect(ctx context.Context, pg *Page, opt Options) (*Result, error) {
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
