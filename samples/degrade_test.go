package samples

import (
	"image"
	"image/color"
	"math"
	"math/rand"
	"testing"

	"tracelift/samples/dipole"
)

// markerPage is a white page with small black squares at known centres.
func markerPage(w, h int, pxmm float64) (*Printout, [][2]float64) {
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	fillNRGBA(img, color.NRGBA{255, 255, 255, 255})
	var pts [][2]float64
	for _, f := range [][2]float64{{0.2, 0.2}, {0.8, 0.25}, {0.5, 0.5}, {0.25, 0.8}, {0.75, 0.75}} {
		cx, cy := math.Round(f[0]*float64(w)), math.Round(f[1]*float64(h))
		for y := int(cy) - 4; y < int(cy)+4; y++ {
			for x := int(cx) - 4; x < int(cx)+4; x++ {
				o := img.PixOffset(x, y)
				img.Pix[o], img.Pix[o+1], img.Pix[o+2] = 0, 0, 0
			}
		}
		pts = append(pts, [2]float64{cx, cy}) // the 8×8 square's centre
	}
	tr := Truth{PxPerMMX: pxmm, PxPerMMY: pxmm, CleanPxPerMM: pxmm, PageToImage: Identity}
	return &Printout{Image: img, Truth: tr}, pts
}

// darkCentroid finds the darkness-weighted centroid in a window, with
// darkness measured from the window's brightest level.
func darkCentroid(img *image.NRGBA, x, y float64, r int) (float64, float64, bool) {
	x0, y0 := int(x)-r, int(y)-r
	var hi float64
	for yy := y0; yy <= y0+2*r; yy++ {
		for xx := x0; xx <= x0+2*r; xx++ {
			if (image.Point{xx, yy}).In(img.Rect) {
				hi = math.Max(hi, float64(img.Pix[img.PixOffset(xx, yy)+1]))
			}
		}
	}
	var sw, sx, sy float64
	for yy := y0; yy <= y0+2*r; yy++ {
		for xx := x0; xx <= x0+2*r; xx++ {
			if !(image.Point{xx, yy}).In(img.Rect) {
				continue
			}
			d := hi - float64(img.Pix[img.PixOffset(xx, yy)+1])
			if d < 0.3*hi { // ignore the soft paper gradient
				continue
			}
			sw += d
			sx += d * (float64(xx) + 0.5)
			sy += d * (float64(yy) + 0.5)
		}
	}
	if sw == 0 {
		return 0, 0, false
	}
	return sx / sw, sy / sw, true
}

// PageToImage must carry a known page point to where its mark landed.
func TestPageToImageMapsMarkers(t *testing.T) {
	t.Parallel()
	for _, name := range Conditions {
		for s := int64(1); s <= 3; s++ {
			d := Condition(name, rand.New(rand.NewSource(s)))
			d.Speckle, d.Creases = 0, 0
			p, pts := markerPage(1200, 850, 4)
			q, err := Degrade(p, d)
			if err != nil {
				t.Fatal(err)
			}
			for _, pt := range pts {
				ex, ey := Apply(q.Truth.PageToImage, pt[0], pt[1])
				gx, gy, ok := darkCentroid(q.Image, ex, ey, 12)
				if !ok {
					t.Fatalf("%s seed %d: no mark near (%.1f, %.1f)", name, s, ex, ey)
				}
				tol := 0.6
				if d.Fax {
					tol = 0.8 // binarized at 100 dpi down: quantized to half a pixel and more
				}
				if e := math.Hypot(gx-ex, gy-ey); e > tol {
					t.Errorf("%s seed %d: mark at (%.2f, %.2f), PageToImage says (%.2f, %.2f), off %.2f px", name, s, gx, gy, ex, ey, e)
				}
			}
		}
	}
}

// Fax output is binary at 200 dpi across and 100 dpi down.
func TestFaxResolution(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 1})
	for _, dpi := range []float64{150, 300} {
		st := DefaultStyle()
		st.DPI = dpi
		p, err := Render(rec, st)
		if err != nil {
			t.Fatal(err)
		}
		q, err := Degrade(p, Degradation{Fax: true, Name: "fax", Seed: 3})
		if err != nil {
			t.Fatal(err)
		}
		W, H := p.Image.Rect.Dx(), p.Image.Rect.Dy()
		gw, gh := q.Image.Rect.Dx(), q.Image.Rect.Dy()
		if math.Abs(float64(gw)-float64(W)*200/dpi) > 1 || math.Abs(float64(gh)-float64(H)*100/dpi) > 1 {
			t.Errorf("%v dpi page %dx%d faxed to %dx%d, want %.0fx%.0f", dpi, W, H, gw, gh, float64(W)*200/dpi, float64(H)*100/dpi)
		}
		// 297 mm across at 200 dpi, 210 mm down at 100 dpi.
		if r := float64(gw) / float64(gh); math.Abs(r-(297.0*200)/(210.0*100)) > 0.01 {
			t.Errorf("fax aspect %.3f, want %.3f", r, 297.0*200/(210*100))
		}
		if math.Abs(q.Truth.PxPerMMX-200/25.4) > 1e-6 || math.Abs(q.Truth.PxPerMMY-100/25.4) > 1e-6 {
			t.Errorf("fax truth scale %v x %v px/mm", q.Truth.PxPerMMX, q.Truth.PxPerMMY)
		}
		var black int
		for i := 0; i < len(q.Image.Pix); i += 4 {
			v := q.Image.Pix[i]
			if v != 0 && v != 255 {
				t.Fatalf("fax pixel value %d is not black or white", v)
			}
			if v == 0 {
				black++
			}
		}
		if f := float64(black) / float64(gw*gh); f < 0.003 || f > 0.2 {
			t.Errorf("fax is %.4f black: trace lost or page flooded", f)
		}
	}
}

// Under every condition, trace points of the truth mapped through
// PageToImage land on dark pixels.
func TestDegradedTraceOnInk(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 21})
	st := DefaultStyle()
	st.DPI = 150
	st.TraceWidthMM = 0.4
	p, err := Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	for _, name := range Conditions {
		d := Condition(name, rand.New(rand.NewSource(7)))
		q, err := Degrade(p, d)
		if err != nil {
			t.Fatal(err)
		}
		tr := q.Truth
		var n, dark int
		for _, pn := range tr.Panels {
			s := tr.Signals.Lead(pn.Lead)
			for k := 0; k < len(s.MV); k += 10 {
				tau := s.StartS + float64(k)/s.RateHz
				if tau < pn.T0S || tau >= pn.T1S || k+1 >= len(s.MV) || math.Abs(s.MV[k+1]-s.MV[k]) > 0.01 {
					continue
				}
				x := pn.Box[0] + (tau-pn.T0S)*tr.SpeedMMPerS*tr.CleanPxPerMM
				y := pn.BaselineYPx - s.MV[k]*tr.GainMMPerMV*tr.CleanPxPerMM
				ix, iy := Apply(tr.PageToImage, x, y)
				// The darkest pixel within one pixel of the mapped point.
				best := 255.0
				for dy := -1; dy <= 1; dy++ {
					for dx := -1; dx <= 1; dx++ {
						pt := image.Pt(int(ix)+dx, int(iy)+dy)
						if pt.In(q.Image.Rect) {
							o := q.Image.PixOffset(pt.X, pt.Y)
							best = math.Min(best, float64(q.Image.Pix[o+1]))
						}
					}
				}
				n++
				if best < 110 {
					dark++
				}
			}
		}
		if n < 500 || float64(dark) < 0.97*float64(n) {
			t.Errorf("%s: %d of %d mapped trace points on ink", name, dark, n)
		}
	}
}

func TestRotationTruth(t *testing.T) {
	t.Parallel()
	p, _ := markerPage(600, 400, 4)
	for _, deg := range []float64{-7, -1.5, 3, 12} {
		q, err := Degrade(p, Degradation{RotationDeg: deg})
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(q.Truth.RotationDeg-deg) > 1e-6 || math.Abs(q.Truth.PxPerMMX-4) > 1e-6 || math.Abs(q.Truth.PxPerMMY-4) > 1e-6 {
			t.Errorf("rotation %v: truth %v°, %v x %v px/mm", deg, q.Truth.RotationDeg, q.Truth.PxPerMMX, q.Truth.PxPerMMY)
		}
		// A counter-clockwise turn lifts the right side of the page: the
		// mark at the right must move up relative to the left one.
		_, ly := Apply(q.Truth.PageToImage, 100, 200)
		_, ry := Apply(q.Truth.PageToImage, 500, 200)
		if (deg > 0) != (ry < ly) {
			t.Errorf("rotation %v: right point y %.1f vs left %.1f", deg, ry, ly)
		}
	}
}

func TestDegradeRepeatableAndErrors(t *testing.T) {
	t.Parallel()
	p, _ := markerPage(400, 300, 2)
	d := Condition("photo", rand.New(rand.NewSource(4)))
	a, err := Degrade(p, d)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := Degrade(p, d)
	for i := range a.Image.Pix {
		if a.Image.Pix[i] != b.Image.Pix[i] {
			t.Fatal("same degradation gave different pixels")
		}
	}
	if p.Image.Pix[0] != 255 {
		t.Fatal("Degrade changed its input")
	}
	for _, bad := range []Degradation{
		{Name: "underwater"}, {RotationDeg: math.NaN()}, {Perspective: 2}, {BlurPx: -1}, {JPEGQuality: 101}, {RotationDeg: 90},
	} {
		if _, err := Degrade(p, bad); err == nil {
			t.Errorf("%+v: no error", bad)
		}
	}
	if _, err := Degrade(nil, Degradation{}); err == nil {
		t.Error("nil printout: no error")
	}
}

func BenchmarkRenderDegrade300dpi(b *testing.B) {
	rec := dipole.Generate(dipole.Params{Seed: 1, NoiseMV: 0.005})
	st := DefaultStyle()
	for _, name := range Conditions {
		d := Condition(name, rand.New(rand.NewSource(1)))
		b.Run(name, func(b *testing.B) {
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				p, err := Render(rec, st)
				if err != nil {
					b.Fatal(err)
				}
				if _, err := Degrade(p, d); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

func BenchmarkRender300dpi(b *testing.B) {
	rec := dipole.Generate(dipole.Params{Seed: 1})
	st := DefaultStyle()
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		if _, err := Render(rec, st); err != nil {
			b.Fatal(err)
		}
	}
}
