package calib

import (
	"context"
	"errors"
	"fmt"
	"image"
	"math"
	"strings"
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
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	theta, _ := gridAngle(wk)
	var gm gridModel
	found := false
	if !opt.ForceUser {
		gm, found = measureGrid(wk, theta)
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	if found {
		return fromGrid(ctx, pg, wk, gm, opt)
	}
	// No grid: the traces' own direction deskews the page.
	theta, coh := coarseAngle(wk)
	if coh < 0.1 {
		theta = 0
	}
	return withoutGrid(ctx, pg, wk, theta, opt)
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
	span := math.Max(gm.X1-gm.X0, gm.Y1-gm.Y0)
	X0, X1 := math.Max(ix0, gm.X0-0.1*span), math.Min(ix1, gm.X1+0.1*span)
	Y0, Y1 := math.Max(iy0, gm.Y0-0.1*span), math.Min(iy1, gm.Y1+0.1*span)
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

	q, turnConf := decideTurn(wk, gm.H, X0, X1, Y0, Y1)
	T := turnMap(q, X0, X1, Y0, Y1)
	wmm, hmm := X1-X0, Y1-Y0
	if q&1 == 1 {
		wmm, hmm = hmm, wmm
		ppx, ppy = ppy, ppx
	}
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
	ink := inkMap(rect, gridLines{known: true, s: s})
	res := &Result{
		Rectified: rect, Ink: ink, PxPerMM: s,
		PxPerMMX: ppx, PxPerMMY: ppy, RotationDeg: rot, Turned: q,
		Source: "grid", RectToImage: M,
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
	ps := findPulses(ink, s, s)
	for i := range ps {
		ps[i].HeightMM /= s
		ps[i].WidthMM /= s
	}
	res.Pulses = ps
	res.GainMMPerMV, res.SpeedMMPerS, res.Warnings = appendSettings(res.Warnings, ps, opt)
	checkHint(pg, res)
	return res, nil
}

func appendSettings(w []string, ps []Pulse, opt Options) (float64, float64, []string) {
	g, sp, ws := settleSettings(ps, opt)
	return g, sp, append(w, ws...)
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
	return f > 0.0003 && f < 0.3
}

// withoutGrid: the page is only deskewed by the traces' own direction and
// the scale comes from a calibration pulse or from the user.
func withoutGrid(ctx context.Context, pg *Page, wk *work, theta float64, opt Options) (*Result, error) {
	b := pg.Image.Bounds()
	c, s := math.Cos(theta), math.Sin(theta)
	W, H := float64(b.Dx()), float64(b.Dy())
	// Output the same size, rotated about the centre by -theta (deskew).
	cxi, cyi := (W-1)/2, (H-1)/2
	M := mat3{c, -s, cxi - c*cxi + s*cyi, s, c, cyi - s*cxi - c*cyi, 0, 0, 1}
	if math.Abs(theta) < 1e-4 {
		M = ident
	}
	rect, err := warpPage(pg.Image, M, b.Dx(), b.Dy())
	if err != nil {
		return nil, fmt.Errorf("calib: %s: resampling failed: %v", stem(pg.Path), err)
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	guess := math.Max(W, H) / 280 // an A4/letter page seen landscape, about 280 mm wide
	ink := inkMap(rect, gridLines{s: guess})
	if !inkPlausible(ink) {
		return nil, fmt.Errorf("calib: %s: no ECG grid or trace in this picture: %w", stem(pg.Path), ErrNotECG)
	}
	res := &Result{Rectified: rect, Ink: ink, RectToImage: M, RotationDeg: -theta * 180 / math.Pi}
	user := opt.UserPxPerMM
	if user == 0 && opt.UserDPI > 0 {
		user = opt.UserDPI / 25.4
	}
	var ps []Pulse
	if !opt.ForceUser {
		ps = findPulses(ink, guess/3, guess*3)
		ps = consistentPulses(ps)
	}
	switch {
	case opt.ForceUser && user > 0:
		res.Source, res.PxPerMM, res.Confidence = "user", user, 0.5
	case len(ps) > 0:
		g := opt.StatedGainMMPerMV
		if g == 0 {
			g = 10
		}
		hs := make([]float64, len(ps))
		for i, p := range ps {
			hs[i] = p.HeightMM
		}
		res.PxPerMM = median(hs) / (g * pulseMV)
		res.Source = "pulse"
		res.Confidence = math.Min(0.6, 0.3+0.1*float64(len(ps)))
		res.Warnings = append(res.Warnings, fmt.Sprintf("no grid found: the scale comes from the calibration pulse, taken as %.4g mm/mV", g))
	case user > 0:
		res.Source, res.PxPerMM, res.Confidence = "user", user, 0.5
		res.Warnings = append(res.Warnings, "no grid or calibration pulse found: the scale given by hand is used")
	default:
		return nil, fmt.Errorf("calib: %s: %w", stem(pg.Path), ErrNoScale)
	}
	res.PxPerMMX, res.PxPerMMY = res.PxPerMM, res.PxPerMM
	for i := range ps {
		ps[i].HeightMM /= res.PxPerMM
		ps[i].WidthMM /= res.PxPerMM
	}
	res.Pulses = ps
	if res.Source == "pulse" {
		// The height defined the scale; only the speed is measured.
		o := opt
		o.StatedGainMMPerMV = 0
		_, sp, ws := settleSettings(ps, o)
		res.GainMMPerMV = opt.StatedGainMMPerMV
		if res.GainMMPerMV == 0 {
			res.GainMMPerMV = 10
		}
		res.SpeedMMPerS = sp
		for _, w := range ws {
			if len(w) > 0 && !strings.Contains(w, "gain") {
				res.Warnings = append(res.Warnings, w)
			}
		}
	} else {
		res.GainMMPerMV, res.SpeedMMPerS, res.Warnings = appendSettings(res.Warnings, ps, opt)
	}
	return res, nil
}

// consistentPulses keeps the pulses whose height agrees with the median
// (a lone rectangle-like shape elsewhere is not trusted).
func consistentPulses(ps []Pulse) []Pulse {
	if len(ps) == 0 {
		return nil
	}
	hs := make([]float64, len(ps))
	for i, p := range ps {
		hs[i] = p.HeightMM
	}
	m := median(hs)
	var out []Pulse
	for _, p := range ps {
		if math.Abs(p.HeightMM/m-1) < 0.08 && p.WidthMM > 0.2*p.HeightMM && p.WidthMM < 1.5*p.HeightMM {
			out = append(out, p)
		}
	}
	return out
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
