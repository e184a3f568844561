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

// drawThickSpike paints, with a round pen of radius r, a flat line at
// y = base with one narrow triangular spike: up by height over half a
// base width, down again over the other half. The centre line is the
// truth, one value per column centre.
func drawThickSpike(w, h int, base, height, halfBase, r float64) (*gray, []float64) {
	g := &gray{w: w, h: h, pix: make([]uint8, w*h)}
	mid := float64(w) / 2
	c := func(x float64) float64 {
		d := math.Abs(x - mid)
		if d >= halfBase {
			return base
		}
		return base - height*(1-d/halfBase)
	}
	// Coverage by 4×4 supersampling of the union of discs centred on the
	// centre line (a pen's sweep).
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			n := 0
			for sy := 0; sy < 4; sy++ {
				for sx := 0; sx < 4; sx++ {
					px, py := float64(x)+(float64(sx)+0.5)/4, float64(y)+(float64(sy)+0.5)/4
					for u := px - r; u <= px+r; u += 0.05 {
						if math.Hypot(px-u, py-c(u)) <= r {
							n++
							break
						}
					}
				}
			}
			g.pix[y*w+x] = uint8(n * 255 / 16)
		}
	}
	truth := make([]float64, w)
	for x := range truth {
		truth[x] = c(float64(x) + 0.5)
	}
	return g, truth
}

// A QRS spike narrower than a thick pen keeps its height: the tip is read
// through the pen's round end, not cut to the width of the line (a round
// pen's stroke is the centre line swept by a disc; common practice for
// plotter and thermal-head traces, from memory).
func TestTracePathThickPenSpike(t *testing.T) {
	const r = 4.0
	g, truth := drawThickSpike(120, 220, 180, 140, 4, r)
	ys, _ := tracePath(g, band{x0: 0, x1: 120, y0: 0, y1: 220, home: 180, pitch: 220, halfLine: r})
	peak := math.Inf(1)
	for x := 50; x < 70; x++ {
		peak = math.Min(peak, ys[x]+0.5)
	}
	want := 180.0 - 140*(1-0.5/4) // the column centre nearest the apex
	if math.Abs(peak-want) > 3 {
		t.Errorf("spike tip at y %.1f, want %.1f (the centre line's highest column)", peak, want)
	}
	var worst float64
	for x := 10; x < 110; x++ {
		if d := math.Abs(ys[x] + 0.5 - truth[x]); d > worst && (x < 55 || x > 65) {
			worst = d
		}
	}
	if worst > 1.5 {
		t.Errorf("flat line off by up to %.1f px", worst)
	}
}

// A grid line that ends inside the last stretch of its row (the grid
// stops short of the area the line removal measures over) fills too
// little of that stretch to show as a line there; it must still go,
// while a trace's flat stretch on another row stays.
func TestGridLineEndingInsideStretch(t *testing.T) {
	const w, h = 1000, 40
	g := &gray{w: w, h: h, pix: make([]uint8, w*h)}
	for x := 0; x < 850; x++ {
		g.pix[10*w+x] = 150 // grid line: to x = 850, inside the last stretch [800, 1000)
	}
	for x := 100; x < 160; x++ {
		g.pix[30*w+x] = 255 // a short flat stretch of trace
	}
	suppressRows(g, 200, 0.08, 0, w)
	for x := 0; x < w; x++ {
		if v := g.pix[10*w+x]; v != 0 {
			t.Fatalf("grid line left at x = %d (%d)", x, v)
		}
	}
	for x := 100; x < 160; x++ {
		if g.pix[30*w+x] != 255 {
			t.Fatalf("trace removed at x = %d", x)
		}
	}
}

// A lead that stays flat over a whole 40 mm stretch (a nearly
// isoelectric aVL at a slow rate) fills that stretch as a grid line
// would; it stands out of its row, though, and must keep its ink.
func TestFlatTraceStretchKept(t *testing.T) {
	const w, h = 1600, 60
	g := &gray{w: w, h: h, pix: make([]uint8, w*h)}
	for y := 29; y <= 31; y++ {
		for x := 600; x < 800; x++ { // the flat trace: one whole stretch [600, 800)
			g.pix[y*w+x] = 200
		}
	}
	for x := 0; x < w; x++ {
		g.pix[10*w+x] = 60 // a faint grid line along the whole row
	}
	suppressRows(g, 200, 0.08, 0, w)
	for x := 600; x < 800; x++ {
		if g.pix[30*w+x] < 190 {
			t.Fatalf("flat trace removed at x = %d (%d left)", x, g.pix[30*w+x])
		}
	}
	for x := 0; x < w; x++ {
		if g.pix[10*w+x] != 0 {
			t.Fatalf("grid line left at x = %d", x)
		}
	}
}

// The QRS strokes of rows stacked one above another can fill a column
// as a vertical grid line would; a grid line has others at the grid's
// pitch beside it and goes, the strokes have none and stay.
func TestStackedStrokesKeptGridColumnsRemoved(t *testing.T) {
	const w, h, seg = 400, 800, 400 // seg 400 px: 10 px per mm
	g := &gray{w: w, h: h, pix: make([]uint8, w*h)}
	for y := 0; y < h; y++ {
		for x := 50; x < 350; x += 10 { // a vertical line every 1 mm
			g.pix[y*w+x] = 90
		}
		for x := 203; x <= 205; x++ { // the strokes, 3 px wide, down the whole column
			g.pix[y*w+x] = 230
		}
	}
	suppressCols(g, seg, 0.05, 0, h)
	for y := 0; y < h; y += 37 {
		if v := g.pix[y*w+204]; v < 200 {
			t.Fatalf("stroke removed at y = %d (%d left)", y, v)
		}
		if v := g.pix[y*w+100]; v != 0 {
			t.Fatalf("grid line left at y = %d (%d)", y, v)
		}
	}
}

// The pen's radius for reading strokes is fitted to the strokes
// themselves: the width measured across flat stretches overstates it (a
// soft line's shoulders, the blur), and a disc too large makes the two
// edges of a steep stroke disagree, so the stroke is read off its line.
// Here the flat width is given 20 % too wide; the spike (12 px of rise
// per column on its flanks) must still be read to half a pixel, its tip
// included. (A round pen's stroke is its
// centre line swept by a disc: common practice for plotter and
// thermal-head traces, from memory.)
func TestTracePathFitsPenRadius(t *testing.T) {
	const r = 2.0
	g, truth := drawThickSpike(120, 220, 190, 150, 12, r)
	ys, _ := tracePath(g, band{x0: 0, x1: 120, y0: 0, y1: 220, home: 190, pitch: 220, halfLine: 1.2 * r})
	var se float64
	n := 0
	for x := 48; x < 72; x++ {
		d := ys[x] + 0.5 - truth[x]
		se += d * d
		n++
	}
	if rms := math.Sqrt(se / float64(n)); rms > 0.5 {
		t.Errorf("spike read off by %.2f px rms down the column", rms)
	}
	tip := math.Min(ys[59], ys[60]) + 0.5
	if d := tip - truth[59]; math.Abs(d) > 0.7 {
		t.Errorf("spike tip at y %.1f, want %.1f", tip, truth[59])
	}
}

// A grid line left on the page (a fax's broken grid escapes line
// removal) crossing a flat stretch of trace is no stroke of it: the
// trace goes on at its level across the line.
func TestTracePathLineCrossingFlat(t *testing.T) {
	const w, h = 120, 200
	g := &gray{w: w, h: h, pix: make([]uint8, w*h)}
	for x := 0; x < w; x++ {
		for y := 99; y <= 101; y++ {
			g.pix[y*w+x] = 255
		}
	}
	for y := 80; y < 190; y++ { // mostly below the trace
		for x := 60; x <= 62; x++ {
			g.pix[y*w+x] = 255
		}
	}
	ys, _ := tracePath(g, band{x0: 0, x1: w, y0: 0, y1: h, home: 100, pitch: 200, halfLine: 1.5})
	for x := 50; x < 72; x++ {
		if d := ys[x] + 0.5 - 100.5; math.Abs(d) > 1 {
			t.Errorf("x %d: trace at y %.1f, want 100.5", x, ys[x]+0.5)
		}
	}
}
