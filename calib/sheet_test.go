package calib

import (
	"context"
	"image"
	"math"
	"math/rand"
	"testing"

	"tracelift/samples"
	"tracelift/samples/dipole"
)

// photoWithoutGrid renders a plain-paper printout (no grid) and degrades
// it as the renderer's phone photo: the sheet at a slant on a table.
func photoWithoutGrid(t *testing.T, seed int64, pulses bool) *samples.Printout {
	t.Helper()
	rec := dipole.Generate(dipole.Params{Seed: seed})
	st := samples.DefaultStyle()
	st.Grid = samples.GridNone
	st.Pulses = pulses
	st.DPI = 200
	p, err := samples.Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	d := samples.Condition("photo", rand.New(rand.NewSource(seed)))
	d.Perspective = 0.8 // a marked slant: the scale changes several per cent across the sheet
	if p, err = samples.Degrade(p, d); err != nil {
		t.Fatal(err)
	}
	return p
}

// A photographed sheet with no grid: its outline gives the perspective,
// the pulses (1 mV, 200 ms; Kligfield et al., Circulation 2007) the
// millimetres. The scale where the result says it holds is checked
// against the renderer's truth at the limit for photos (1.5 %),
// and so are the skew and the gain. (Seeds 1 and 3 once read the plain
// sheet's camera texture as a 1 mm grid.)
func TestSheetPhotoWithPulses(t *testing.T) {
	for _, seed := range []int64{1, 3, 8} {
		p := photoWithoutGrid(t, seed, true)
		res, err := Detect(context.Background(), &Page{Image: p.Image}, Options{})
		if err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		tx, ty, trot := p.Truth.ScalesAt(res.ScaleAt[0], res.ScaleAt[1])
		if res.Source != "pulse" || math.Abs(res.PxPerMMX/tx-1) > 0.015 || math.Abs(res.PxPerMMY/ty-1) > 0.015 {
			t.Errorf("seed %d: source %q px/mm %.3f×%.3f, truth %.3f×%.3f (%q)", seed, res.Source, res.PxPerMMX, res.PxPerMMY, tx, ty, res.Warnings)
		}
		if math.Abs(res.RotationDeg-trot) > 0.2 {
			t.Errorf("seed %d: rotation %.3f°, truth %.3f°", seed, res.RotationDeg, trot)
		}
		if res.GainMMPerMV != p.Truth.GainMMPerMV {
			t.Errorf("seed %d: gain %v, truth %v", seed, res.GainMMPerMV, p.Truth.GainMMPerMV)
		}
	}
}

// A photographed sheet with neither grid nor pulse: the outline's shape
// says A4 (297 × 210 mm, ISO 216), and the sheet's size gives the scale,
// with a low confidence and a warning.
func TestSheetPhotoPageOnly(t *testing.T) {
	p := photoWithoutGrid(t, 5, false)
	res, err := Detect(context.Background(), &Page{Image: p.Image}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	tx, ty, _ := p.Truth.ScalesAt(res.ScaleAt[0], res.ScaleAt[1])
	if res.Source != "page" || math.Abs(res.PxPerMMX/tx-1) > 0.015 || math.Abs(res.PxPerMMY/ty-1) > 0.015 {
		t.Errorf("source %q px/mm %.3f×%.3f, truth %.3f×%.3f", res.Source, res.PxPerMMX, res.PxPerMMY, tx, ty)
	}
	if res.Confidence > 0.4 || len(res.Warnings) == 0 {
		t.Errorf("a scale from the sheet's size alone: confidence %.2f, warnings %q", res.Confidence, res.Warnings)
	}
}

// The outline homography sends the four corners to the unit square's.
func TestQuadToSquare(t *testing.T) {
	q := [4][2]float64{{102, 95}, {1410, 40}, {1530, 1010}, {80, 1102}}
	Q, ok := quadToSquare(q)
	if !ok {
		t.Fatal("degenerate")
	}
	want := [4][2]float64{{0, 0}, {1, 0}, {1, 1}, {0, 1}}
	for i, c := range q {
		u, v := Q.apply(c[0], c[1])
		if math.Abs(u-want[i][0]) > 1e-9 || math.Abs(v-want[i][1]) > 1e-9 {
			t.Errorf("corner %d → (%.6f, %.6f), want %v", i, u, v, want[i])
		}
	}
}

// A standard sheet is recognised from its measured sides (A4 297 × 210 mm
// by ISO 216, US Letter 279.4 × 215.9 mm by ANSI/ASME Y14.1), either way
// up, and a sheet of another size is not.
func TestSnapPaper(t *testing.T) {
	cases := []struct {
		w, h   float64
		ok     bool
		ww, wh float64
	}{
		{296, 206, true, 297, 210},
		{281, 213, true, 279.4, 215.9},
		{211, 293, true, 210, 297},
		{250, 180, false, 0, 0},
		{297, 240, false, 0, 0},
	}
	for _, c := range cases {
		w, h, ok := snapPaper(c.w, c.h)
		if ok != c.ok || (ok && (w != c.ww || h != c.wh)) {
			t.Errorf("snapPaper(%v, %v) = %v, %v, %v; want %v, %v, %v", c.w, c.h, w, h, ok, c.ww, c.wh, c.ok)
		}
	}
}

// TestClearOffSheet: ink outside a sheet's outline, brought in by the
// margin, is blanked whichever way the corners run; inside it is kept.
func TestClearOffSheet(t *testing.T) {
	for _, q := range [][4][2]float64{
		{{10, 10}, {90, 10}, {90, 90}, {10, 90}}, // clockwise on the picture
		{{10, 10}, {10, 90}, {90, 90}, {90, 10}}, // the other way round
	} {
		ink := image.NewGray(image.Rect(0, 0, 100, 100))
		for i := range ink.Pix {
			ink.Pix[i] = 255
		}
		clearOffSheet(ink, q, 5)
		for _, c := range []struct {
			x, y int
			want uint8
		}{{50, 50, 255}, {16, 50, 255}, {12, 50, 0}, {95, 50, 0}, {50, 3, 0}, {50, 87, 0}, {50, 84, 255}} {
			if got := ink.GrayAt(c.x, c.y).Y; got != c.want {
				t.Errorf("corners %v: (%d,%d) = %d, want %d", q, c.x, c.y, got, c.want)
			}
		}
	}
}
