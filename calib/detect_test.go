package calib

import (
	"context"
	"errors"
	"image"
	"image/color"
	"math"
	"math/rand"
	"strings"
	"testing"

	"tracelift/samples"
	"tracelift/samples/dipole"
)

// synthPage draws a page by construction: a 1 mm grid with heavier lines
// every 5 mm (the usual ECG paper, common practice), a sine "trace" along
// the time axis and a standard calibration pulse of 1 mV × 200 ms at
// 10 mm/mV and 25 mm/s, i.e. 10 mm × 5 mm (Kligfield et al., Circulation
// 2007). Pixel (x, y) is paper mm ((x−cx)·cosθ − … )/ppm: the page is
// turned counter-clockwise by rotDeg about the image centre and sampled at
// ppmX × ppmY px/mm, so the truth is exact.
type synth struct {
	w, h         int
	ppmX, ppmY   float64
	rotDeg       float64
	grid         color.NRGBA
	dots         bool
	minorMM      float64 // line widths
	majorMM      float64
	traceMM      float64
	noGrid, noPu bool
}

func (s synth) draw() *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, s.w, s.h))
	a := s.rotDeg * math.Pi / 180
	ca, sa := math.Cos(a), math.Sin(a)
	cx, cy := float64(s.w)/2, float64(s.h)/2
	pxmm := math.Min(s.ppmX, s.ppmY)
	cover := func(dmm, widthMM float64) float64 { // anti-aliased line coverage
		d := dmm*pxmm - widthMM*pxmm/2
		return math.Max(0, math.Min(1, 0.5-d))
	}
	for y := 0; y < s.h; y++ {
		for x := 0; x < s.w; x++ {
			// Image px → page px (undo the CCW turn: y is down) → mm.
			dx, dy := float64(x)-cx, float64(y)-cy
			px := dx*ca - dy*sa
			py := dx*sa + dy*ca
			X, Y := px/s.ppmX, py/s.ppmY
			r, g, b := 255.0, 255.0, 255.0
			mix := func(c color.NRGBA, f float64) {
				r = r*(1-f) + float64(c.R)*f
				g = g*(1-f) + float64(c.G)*f
				b = b*(1-f) + float64(c.B)*f
			}
			if !s.noGrid {
				fx, fy := math.Abs(X-math.Round(X)), math.Abs(Y-math.Round(Y))
				f5x, f5y := math.Abs(X/5-math.Round(X/5))*5, math.Abs(Y/5-math.Round(Y/5))*5
				if s.dots {
					f := cover(math.Hypot(fx, fy), 2*s.minorMM)
					f = math.Max(f, cover(math.Hypot(f5x, f5y), 2*s.majorMM))
					mix(s.grid, f)
				} else {
					f := math.Max(cover(fx, s.minorMM), cover(fy, s.minorMM))
					f = math.Max(f, math.Max(cover(f5x, s.majorMM), cover(f5y, s.majorMM)))
					mix(s.grid, f)
				}
			}
			// Trace rows every 40 mm: a baseline with a bump each second.
			black := color.NRGBA{20, 20, 20, 255}
			for row := -2.0; row <= 2; row++ {
				base := row*40 + 5
				var yv float64
				if t := math.Mod(X+1000, 25); t > 10 && t < 14 {
					yv = -8 * math.Sin((t-10)/4*math.Pi)
				}
				mix(black, cover(math.Abs(Y-(base+yv))*math.Cos(math.Atan(2*math.Pi*yv/4)), s.traceMM))
				if !s.noPu {
					// Pulse at X = -120 .. -115, 10 mm tall, on this row.
					x0, x1, top := -120.0, -115.0, base-10
					if X > x0-0.5 && X < x1+0.5 && Y > top-0.5 && Y < base+0.5 {
						f := 0.0
						if Y >= top && Y <= base {
							f = math.Max(cover(math.Abs(X-x0), s.traceMM), cover(math.Abs(X-x1), s.traceMM))
						}
						if X > x0 && X < x1 {
							f = math.Max(f, cover(math.Abs(Y-top), s.traceMM))
						}
						mix(black, f)
					}
				}
			}
			img.Pix[y*img.Stride+4*x] = uint8(r)
			img.Pix[y*img.Stride+4*x+1] = uint8(g)
			img.Pix[y*img.Stride+4*x+2] = uint8(b)
			img.Pix[y*img.Stride+4*x+3] = 255
		}
	}
	return img
}

var (
	red   = color.NRGBA{230, 90, 90, 255}
	green = color.NRGBA{90, 170, 100, 255}
	blue  = color.NRGBA{90, 130, 220, 255}
	grey  = color.NRGBA{150, 150, 150, 255}
)

func TestSyntheticGrid(t *testing.T) {
	cases := []struct {
		name string
		s    synth
	}{
		{"red 7.3 px/mm +2°", synth{w: 2100, h: 1500, ppmX: 7.3, ppmY: 7.3, rotDeg: 2, grid: red, minorMM: 0.1, majorMM: 0.25, traceMM: 0.3}},
		{"green 11.81 px/mm -0.7°", synth{w: 3400, h: 2400, ppmX: 11.811, ppmY: 11.811, rotDeg: -0.7, grid: green, minorMM: 0.08, majorMM: 0.2, traceMM: 0.3}},
		{"blue 5.5 px/mm level", synth{w: 1600, h: 1150, ppmX: 5.5, ppmY: 5.5, grid: blue, minorMM: 0.12, majorMM: 0.3, traceMM: 0.35}},
		{"grey dots 8 px/mm +1°", synth{w: 2300, h: 1650, ppmX: 8, ppmY: 8, rotDeg: 1, grid: grey, dots: true, minorMM: 0.12, majorMM: 0.25, traceMM: 0.3}},
		{"fax 200×100 dpi", synth{w: 2300, h: 820, ppmX: 200 / 25.4, ppmY: 100 / 25.4, rotDeg: 0.3, grid: grey, minorMM: 0.12, majorMM: 0.3, traceMM: 0.4}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			img := c.s.draw()
			res, err := Detect(context.Background(), &Page{Image: img, Path: c.name}, Options{})
			if err != nil {
				t.Fatal(err)
			}
			// Construction truth: the drawn scale and turn.
			ex, ey := res.PxPerMMX/c.s.ppmX-1, res.PxPerMMY/c.s.ppmY-1
			if math.Abs(ex) > 0.003 || math.Abs(ey) > 0.003 {
				t.Errorf("px/mm %.4f×%.4f, drawn %.4f×%.4f", res.PxPerMMX, res.PxPerMMY, c.s.ppmX, c.s.ppmY)
			}
			// The drawn turn (the construction turns the page before the
			// per-axis sampling, so the time axis keeps that angle).
			want := c.s.rotDeg
			if math.Abs(res.RotationDeg-want) > 0.1 {
				t.Errorf("rotation %.3f°, drawn %.3f°", res.RotationDeg, want)
			}
			if res.Source != "grid" || res.Turned != 0 {
				t.Errorf("source %q turned %d", res.Source, res.Turned)
			}
			// 10 mm × 5 mm pulse: 10 mm/mV, 25 mm/s (Kligfield et al. 2007).
			if res.GainMMPerMV != 10 || res.SpeedMMPerS != 25 || len(res.Pulses) == 0 {
				t.Errorf("gain %v speed %v pulses %d, want 10 mm/mV 25 mm/s", res.GainMMPerMV, res.SpeedMMPerS, len(res.Pulses))
			}
			for _, p := range res.Pulses {
				if math.Abs(p.HeightMM-10) > 0.5 || math.Abs(p.WidthMM-5) > 0.5 {
					t.Errorf("pulse %.2f × %.2f mm, drawn 10 × 5", p.HeightMM, p.WidthMM)
				}
			}
			if res.Confidence <= 0 || res.Confidence > 1 {
				t.Errorf("confidence %v", res.Confidence)
			}
			if r := res.Rectified.Bounds(); r != res.Ink.Bounds() {
				t.Errorf("rectified %v ink %v", r, res.Ink.Bounds())
			}
		})
	}
}

// The ink map must drop the grid and keep a thin trace: a 0.15 mm trace on
// a grey grid whose lines are as wide as the trace.
func TestInkDropsGridKeepsThinTrace(t *testing.T) {
	s := synth{w: 2400, h: 1700, ppmX: 8, ppmY: 8, grid: grey, minorMM: 0.1, majorMM: 0.2, traceMM: 0.15, noPu: true}
	res, err := Detect(context.Background(), &Page{Image: s.draw()}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	ink := res.Ink
	m := mat3(res.RectToImage)
	inv, _ := m.inv()
	// Sample the grid lines (rect coordinates: whole mm) between trace rows
	// and the trace baselines, mapped from the page's own mm.
	toRect := func(X, Y float64) (int, int) {
		// page mm → image px (the construction) → rect px.
		x, y := X*s.ppmX+float64(s.w)/2, Y*s.ppmY+float64(s.h)/2
		rx, ry := inv.apply(x, y)
		return int(math.Round(rx)), int(math.Round(ry))
	}
	at := func(x, y int) uint8 {
		if !image.Pt(x, y).In(ink.Rect) {
			return 0
		}
		return ink.GrayAt(x, y).Y
	}
	var gridOn, gridN, traceOn, traceN int
	for X := -100.0; X <= 100; X += 0.37 {
		for _, Y := range []float64{-15, -20, 25, 30} { // whole-mm grid lines away from traces
			x, y := toRect(X, Y)
			gridN++
			if at(x, y) >= 128 {
				gridOn++
			}
		}
		if t := math.Mod(X+1000, 25); t > 9 && t < 15 {
			continue
		}
		for _, Y := range []float64{5, 45} { // baselines
			x, y := toRect(X, Y)
			best := uint8(0)
			for d := -1; d <= 1; d++ {
				best = max(best, at(x, y+d))
			}
			traceN++
			if best >= 128 {
				traceOn++
			}
		}
	}
	if f := float64(gridOn) / float64(gridN); f > 0.02 {
		t.Errorf("%.1f%% of grid-line samples read as ink", 100*f)
	}
	if f := float64(traceOn) / float64(traceN); f < 0.95 {
		t.Errorf("only %.1f%% of the 0.15 mm trace kept", 100*f)
	}
}

func TestTurnedPages(t *testing.T) {
	rec := dipole.Generate(dipole.Params{Seed: 4})
	st := samples.DefaultStyle()
	st.DPI = 200
	p, err := samples.Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	for q := 0; q < 4; q++ {
		// Turn the printout by q quarter turns clockwise; Detect should
		// undo it with the same number of counter-clockwise turns.
		img := turnNRGBA(p.Image, (4-q)%4)
		res, err := Detect(context.Background(), &Page{Image: img}, Options{})
		if err != nil {
			t.Fatalf("q=%d: %v", q, err)
		}
		if res.Turned != q {
			t.Errorf("turned clockwise %d times: Detect turned %d", q, res.Turned)
		}
		if e := math.Abs(res.PxPerMMX/p.Truth.PxPerMMX - 1); e > 0.003 {
			t.Errorf("q=%d: px/mm along time %.4f, truth %.4f", q, res.PxPerMMX, p.Truth.PxPerMMX)
		}
		if res.Rectified.Bounds().Dx() < res.Rectified.Bounds().Dy() {
			t.Errorf("q=%d: upright page %v is not landscape", q, res.Rectified.Bounds())
		}
	}
}

func TestNotAnECG(t *testing.T) {
	blank := image.NewNRGBA(image.Rect(0, 0, 800, 600))
	grad := image.NewNRGBA(image.Rect(0, 0, 800, 600))
	noise := image.NewNRGBA(image.Rect(0, 0, 800, 600))
	rng := rand.New(rand.NewSource(1))
	for i := 0; i < 800*600; i++ {
		x := i % 800
		blank.Pix[4*i], blank.Pix[4*i+1], blank.Pix[4*i+2], blank.Pix[4*i+3] = 255, 255, 255, 255
		v := uint8(40 + x*200/800)
		grad.Pix[4*i], grad.Pix[4*i+1], grad.Pix[4*i+2], grad.Pix[4*i+3] = v, v/2, 255-v, 255
		noise.Pix[4*i], noise.Pix[4*i+1], noise.Pix[4*i+2], noise.Pix[4*i+3] = uint8(rng.Intn(256)), uint8(rng.Intn(256)), uint8(rng.Intn(256)), 255
	}
	tiny := image.NewGray(image.Rect(0, 0, 1, 1))
	for _, c := range []struct {
		name string
		img  image.Image
	}{{"blank", blank}, {"gradient", grad}, {"noise", noise}, {"1x1", tiny}} {
		t.Run(c.name, func(t *testing.T) {
			_, err := Detect(context.Background(), &Page{Image: c.img, Path: c.name}, Options{})
			if !errors.Is(err, ErrNotECG) {
				t.Fatalf("got %v, want ErrNotECG", err)
			}
			if !strings.HasPrefix(err.Error(), "calib: ") {
				t.Fatalf("error %q lacks the package prefix", err)
			}
			// A hand-given scale does not make noise an ECG.
			if _, err := Detect(context.Background(), &Page{Image: c.img}, Options{UserDPI: 300}); err == nil {
				t.Fatal("no error with a user scale")
			}
		})
	}
	if _, err := Detect(context.Background(), nil, Options{}); err == nil {
		t.Fatal("nil page: no error")
	}
	if _, err := Detect(context.Background(), &Page{Image: blank}, Options{UserDPI: math.NaN()}); err == nil {
		t.Fatal("NaN option: no error")
	}
}

// Without a grid the scale comes from the calibration pulse (standard
// 10 mm/mV, Kligfield et al. 2007), then from the user, and Source says
// which.
func TestNoGridFallbacks(t *testing.T) {
	rec := dipole.Generate(dipole.Params{Seed: 9})
	st := samples.DefaultStyle()
	st.Grid = samples.GridNone
	st.DPI = 200
	p, err := samples.Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Detect(context.Background(), &Page{Image: p.Image}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if res.Source != "pulse" || math.Abs(res.PxPerMM/p.Truth.PxPerMMX-1) > 0.02 {
		t.Errorf("source %q px/mm %.3f, truth %.3f", res.Source, res.PxPerMM, p.Truth.PxPerMMX)
	}
	if res.GainMMPerMV != 10 || res.SpeedMMPerS != 25 {
		t.Errorf("gain %v speed %v", res.GainMMPerMV, res.SpeedMMPerS)
	}
	res, err = Detect(context.Background(), &Page{Image: p.Image}, Options{UserDPI: 200, ForceUser: true})
	if err != nil || res.Source != "user" || math.Abs(res.PxPerMM-200/25.4) > 1e-9 {
		t.Fatalf("forced user scale: %v %+v", err, res)
	}
	st.Pulses = false
	p, err = samples.Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	// A whole sheet edge to edge: its shape (A4, ISO 216) gives the
	// scale, with a warning to check it.
	res, err = Detect(context.Background(), &Page{Image: p.Image}, Options{})
	if err != nil || res.Source != "page" || math.Abs(res.PxPerMM/p.Truth.PxPerMMX-1) > 0.01 || len(res.Warnings) == 0 {
		t.Fatalf("no grid, no pulse, whole sheet: %v %+v", err, res)
	}
	// Cropped to no standard sheet's shape: nothing gives the scale.
	b := p.Image.Bounds()
	crop := p.Image.SubImage(image.Rect(b.Min.X, b.Min.Y, b.Min.X+b.Dx()*85/100, b.Max.Y)).(*image.NRGBA)
	if _, err := Detect(context.Background(), &Page{Image: crop}, Options{}); !errors.Is(err, ErrNoScale) {
		t.Fatalf("no grid, no pulse, cropped: %v, want ErrNoScale", err)
	}
	res, err = Detect(context.Background(), &Page{Image: p.Image}, Options{UserPxPerMM: 7.874})
	if err != nil || res.Source != "user" {
		t.Fatalf("user scale: %v", err)
	}
	if len(res.Warnings) == 0 {
		t.Error("no warning that the scale was given by hand")
	}
}

// A pulse that disagrees with the stated gain is reported.
func TestStatedGainDisagrees(t *testing.T) {
	rec := dipole.Generate(dipole.Params{Seed: 2})
	st := samples.DefaultStyle()
	st.DPI = 200
	p, err := samples.Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Detect(context.Background(), &Page{Image: p.Image}, Options{StatedGainMMPerMV: 20})
	if err != nil {
		t.Fatal(err)
	}
	if res.GainMMPerMV != 10 {
		t.Errorf("gain %v, the pulse shows 10", res.GainMMPerMV)
	}
	found := false
	for _, w := range res.Warnings {
		found = found || strings.Contains(w, "stated")
	}
	if !found {
		t.Errorf("no warning about the stated gain: %q", res.Warnings)
	}
}

func TestUserScaleFromPoints(t *testing.T) {
	// A 3-4-5 right triangle: points 500 px apart over 50 mm.
	if v := UserScaleFromPoints(100, 100, 400, 500, 50); math.Abs(v-10) > 1e-12 {
		t.Fatalf("got %v, want 10", v)
	}
	if UserScaleFromPoints(1, 1, 1, 1, 10) != 0 || UserScaleFromPoints(0, 0, 1, 1, 0) != 0 || UserScaleFromPoints(0, 0, 1, 1, math.NaN()) != 0 {
		t.Fatal("degenerate input should give 0")
	}
}

func TestDetectCancelled(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	s := synth{w: 900, h: 700, ppmX: 5, ppmY: 5, grid: red, minorMM: 0.1, majorMM: 0.25, traceMM: 0.3}
	if _, err := Detect(ctx, &Page{Image: s.draw()}, Options{}); !errors.Is(err, context.Canceled) {
		t.Fatalf("got %v", err)
	}
}
