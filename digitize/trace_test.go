package digitize

import (
	"math"
	"testing"
)

// drawSine paints a 3-px-thick sine wave onto a blank map.
func drawSine(w, h int, amp, period float64) (*gray, []float64) {
	g := &gray{w: w, h: h, pix: make([]uint8, w*h)}
	truth := make([]float64, w)
	for x := 0; x < w; x++ {
		yc := float64(h)/2 + amp*math.Sin(2*math.Pi*float64(x)/period)
		truth[x] = yc
		for y := 0; y < h; y++ {
			if math.Abs(float64(y)+0.5-yc) <= 1.5 {
				g.pix[y*w+x] = 255
			}
		}
	}
	return g, truth
}

func TestTracePathSine(t *testing.T) {
	g, truth := drawSine(400, 200, 40, 100)
	ys, _ := tracePath(g, band{x0: 0, x1: 400, y0: 0, y1: 200, home: 100, pitch: 200, halfLine: 1.5})
	var worst float64
	for x := range ys {
		worst = math.Max(worst, math.Abs(ys[x]+0.5-truth[x]))
	}
	if worst > 3 {
		t.Errorf("worst error %.1f px", worst)
		for x := 0; x < 60; x++ {
			t.Logf("x %d truth %.1f got %.1f", x, truth[x], ys[x]+0.5)
		}
	}
}
