package calib

import (
	"image"
	"math"
	"testing"
)

// drawPulse draws a calibration pulse on g: 1 mV for 200 ms at 10 mm/mV
// and 25 mm/s is 10 mm tall and 5 mm wide (Kligfield et al., Circulation
// 2007;115:1306-1324), with the baseline running out on both sides, at s
// px/mm, its sides leaning by lean px per row (a page seen at a slant),
// in strokes th px thick of ink level v.
func drawPulse(g *image.Gray, x0, base int, s, lean float64, th int, v uint8) {
	h, w := int(math.Round(10*s)), int(math.Round(5*s))
	set := func(x, y int) {
		if image.Pt(x, y).In(g.Rect) {
			g.Pix[y*g.Stride+x] = v
		}
	}
	// Stroke centre lines: the top at base-h, the baseline at base.
	shift := func(y int) int { return int(math.Round(float64(base-y) * lean)) }
	for y := base - h - th/2; y <= base+th/2; y++ {
		for t := 0; t < th; t++ {
			set(x0+shift(y)+t, y)   // rising side
			set(x0+w+shift(y)+t, y) // falling side
		}
	}
	for t := 0; t < th; t++ {
		for x := x0 + shift(base-h); x <= x0+w+shift(base-h)+th; x++ {
			set(x, base-h-th/2+t) // top
		}
		for x := x0 - int(3*s); x <= x0+th; x++ {
			set(x, base+th/2-t) // baseline in
		}
		for x := x0 + w; x <= x0+w+int(3*s); x++ {
			set(x, base+th/2-t) // baseline out
		}
	}
}

// A pulse is found and measured upright, and leaning on a page that was
// not flattened (a photo of a sheet without a grid).
func TestPulseUprightAndLeaning(t *testing.T) {
	const s = 8.0
	for _, c := range []struct {
		lean float64
		free bool
	}{{0, false}, {0, true}, {0.08, true}} {
		g := image.NewGray(image.Rect(0, 0, 400, 200))
		drawPulse(g, 100, 150, s, c.lean, 3, 255)
		ps := findPulses(g, s, s, 128, c.free)
		if len(ps) != 1 {
			t.Errorf("lean %.2f: %d pulses, want 1", c.lean, len(ps))
			continue
		}
		// Height between the strokes' centre lines (10 mm), width centre to
		// centre (5 mm), each to about a pixel.
		if hmm := ps[0].HeightMM / s; math.Abs(hmm-10) > 0.2 {
			t.Errorf("lean %.2f: height %.2f mm, want 10", c.lean, hmm)
		}
		if wmm := ps[0].WidthMM / s; math.Abs(wmm-5) > 0.2 {
			t.Errorf("lean %.2f: width %.2f mm, want 5", c.lean, wmm)
		}
	}
	// Two strokes leaning apart (the Λ of a QRS complex) with a bar on
	// top are no pulse.
	g := image.NewGray(image.Rect(0, 0, 400, 200))
	drawPulse(g, 100, 150, s, 0.08, 3, 255)
	for y := 70; y <= 150; y++ { // mirror the falling side to lean the other way
		for x := 100 + 40 - 10; x < 100+40+20; x++ {
			g.Pix[y*g.Stride+x] = 0
		}
		for tt := 0; tt < 3; tt++ {
			g.Pix[y*g.Stride+140-int(math.Round(float64(150-y)*0.08))+tt] = 255
		}
	}
	for _, p := range findPulses(g, s, s, 128, true) {
		if math.Abs(p.HeightMM/s-10) < 1 {
			t.Errorf("sides leaning apart read as a pulse: %+v", p)
		}
	}
}

// An upright pulse whose sides' columns end a few rows apart (a fax's
// ragged strokes, a corner) is still found when the sides stand
// upright: their lean, fitted on runs of nearly the same rows, is noise
// (a fax's 20 mm pulse read −1.06 and +1.35 px a row and was lost).
func TestPulseRaggedUprightSides(t *testing.T) {
	const s, th = 8.0, 5
	g := image.NewGray(image.Rect(0, 0, 400, 200))
	drawPulse(g, 100, 150, s, 0, th, 255)
	top := 150 - 80 - th/2
	for k := 0; k < th; k++ {
		// The rising side's columns start lower left to right, the
		// falling side's lower right to left: the sides "lean" apart.
		for y := top; y < top+(3*k)/2; y++ {
			g.Pix[y*g.Stride+100+k] = 0
			g.Pix[y*g.Stride+140+th-1-k] = 0
		}
	}
	if ps := findPulses(g, s, s, 128, false); len(ps) != 1 {
		t.Errorf("%d pulses, want 1", len(ps))
	}
}

// Where a tracer knows a pulse should stand (a row's first stretch), a
// pulse is found whose side is broken over 1.5 mm (a fax that lost a
// stretch of a faint line), whose top bar is broken over a fifth of its
// length, and whose falling side runs on down to a trace joined to it on
// a baseline 0.8 mm lower than the pulse's own; the page-wide search,
// which may not take letters or boxes for pulses, does not take it.
func TestPulseAtRowStartBrokenAndJoined(t *testing.T) {
	const s, th = 6.0, 1
	g := image.NewGray(image.Rect(0, 0, 300, 160))
	drawPulse(g, 100, 120, s, 0, th, 255)
	set := func(x, y int, v uint8) { g.Pix[y*g.Stride+x] = v }
	for y := 80; y < 89; y++ { // the rising side broken
		set(100, y, 0)
	}
	for x := 110; x < 116; x++ { // the top bar broken
		set(x, 120-60, 0)
	}
	for x := 131; x <= 150; x++ { // the trace leaves on a lower baseline
		set(x, 120, 0)
	}
	for y := 120; y <= 125; y++ {
		set(130, y, 255)
	}
	for x := 130; x <= 170; x++ {
		set(x, 125, 255)
	}
	r := image.Rect(60, 40, 200, 140)
	if ps := PulsesIn(g, r, s, 128); len(ps) != 0 {
		t.Errorf("page-wide rules took it: %+v", ps)
	}
	ps := PulsesAtRowStart(g, r, s, 128)
	if len(ps) != 1 {
		t.Fatalf("%d pulses at the row start, want 1", len(ps))
	}
	// 10 mm tall at 10 mm/mV, 5 mm wide (Kligfield et al. 2007), to a
	// pixel of the feet's difference.
	if p := ps[0]; math.Abs(p.HeightMM-10) > 0.8 || math.Abs(p.WidthMM-5) > 0.3 {
		t.Errorf("pulse %.2f × %.2f mm, want 10 × 5", p.HeightMM, p.WidthMM)
	}
}

// The ink level that counts as a trace follows the traces' own strength:
// half way to full strength when they reach it, half their level when a
// pale pen never does, never under what grid lines leave.
func TestInkThresholdFollowsTraces(t *testing.T) {
	for _, c := range []struct {
		level uint8
		want  uint8
	}{{255, 128}, {100, 50}, {60, 48}} {
		g := image.NewGray(image.Rect(0, 0, 500, 400))
		for y := 0; y < 400; y++ {
			for x := 0; x < 500; x++ {
				if x%10 == 0 {
					g.Pix[y*g.Stride+x] = 20 // a faint line left of the grid
				}
			}
		}
		for _, y := range []int{100, 101, 102, 250, 251, 252} { // two traces' baselines, 1.5 % of the page
			for x := 0; x < 500; x++ {
				g.Pix[y*g.Stride+x] = c.level
			}
		}
		if got := inkThreshold(g, g.Rect); got != c.want {
			t.Errorf("traces at %d: threshold %d, want %d", c.level, got, c.want)
		}
	}
}
