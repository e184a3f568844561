package samples

import (
	"math"
	"math/rand"
	"testing"
)

// Unwarp must bring each mark back to where markerPage painted it, the
// inverse of what TestPageToImageMapsMarkers checks.
func TestUnwarpReturnsMarkers(t *testing.T) {
	t.Parallel()
	for _, name := range Conditions {
		d := Condition(name, rand.New(rand.NewSource(2)))
		d.Speckle, d.Creases = 0, 0
		p, pts := markerPage(1200, 850, 4)
		q, err := Degrade(p, d)
		if err != nil {
			t.Fatal(err)
		}
		flat := Unwarp(q.Image, q.Truth, 1200, 850)
		if flat.Rect.Dx() != 1200 || flat.Rect.Dy() != 850 {
			t.Fatalf("%s: unwarped to %v, want 1200×850", name, flat.Rect)
		}
		for _, pt := range pts {
			gx, gy, ok := darkCentroid(flat, pt[0], pt[1], 12)
			if !ok {
				t.Fatalf("%s: no mark near (%.0f, %.0f)", name, pt[0], pt[1])
			}
			tol := 0.6
			if d.Fax {
				tol = 1.2 // binarized at 100 dpi down: a pixel there is 1.7 clean px tall
			}
			if e := math.Hypot(gx-pt[0], gy-pt[1]); e > tol {
				t.Errorf("%s: mark painted at (%.1f, %.1f) unwarped to (%.2f, %.2f), off %.2f px", name, pt[0], pt[1], gx, gy, e)
			}
		}
	}
}
