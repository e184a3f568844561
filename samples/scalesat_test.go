package samples

import (
	"math"
	"testing"
)

// Truth.ScalesAt reads the scale and direction off a page-to-image map made by
// hand: page px scaled by 1.5 and turned 30° counter-clockwise (y down, so
// the time axis points up and to the right) gives 1.5 × the clean px/mm on
// both axes and 30°, wherever it is asked; a bent page falls back to the
// global truth.
func TestTruthScalesAt(t *testing.T) {
	a := 30 * math.Pi / 180
	c, s := 1.5*math.Cos(a), 1.5*math.Sin(a)
	tr := Truth{CleanPxPerMM: 8, PxPerMMX: 1, PxPerMMY: 2, RotationDeg: 3,
		PageToImage: [9]float64{c, s, 40, -s, c, 900, 0, 0, 1}}
	for _, p := range [][2]float64{{100, 200}, {1500, 50}} {
		x, y, rot := tr.ScalesAt(p[0], p[1])
		if math.Abs(x-12) > 1e-9 || math.Abs(y-12) > 1e-9 || math.Abs(rot-30) > 1e-9 {
			t.Errorf("at %v: %.6f × %.6f px/mm, %.6f°, want 12 × 12, 30°", p, x, y, rot)
		}
	}
	tr.Bend = &Bend{}
	if x, y, rot := tr.ScalesAt(100, 200); x != 1 || y != 2 || rot != 3 {
		t.Errorf("bent page: %v %v %v, want the global truth 1 2 3", x, y, rot)
	}
}
