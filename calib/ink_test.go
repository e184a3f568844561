package calib

import (
	"image"
	"image/color"
	"image/draw"
	"math"
	"testing"
)

// Two steep strokes lying close on either side of a grid line (the up- and
// downstroke of a narrow R wave) must not be joined across the line by the
// ink map, while a trace crossing a line keeps its ink on the line. The
// page is built here: a grey 1 mm grid (common practice: ECG paper is
// ruled every 1 mm) at 12 px/mm, black strokes 3 px wide.
func TestInkKeepsCloseStrokesApart(t *testing.T) {
	const s = 12
	w, h := 50*s, 34*s
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	set := func(x, y int, c color.NRGBA) { img.SetNRGBA(x, y, c) }
	white, grey, black := color.NRGBA{255, 255, 255, 255}, color.NRGBA{150, 150, 150, 255}, color.NRGBA{0, 0, 0, 255}
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			c := white
			if x%s == 0 || y%s == 0 {
				c = grey
			}
			set(x, y, c)
		}
	}
	// Strokes at 3..5 px either side of the vertical line x = 20 mm, from
	// y = 10 mm to 20 mm; a horizontal trace along y = 25.5 mm crossing
	// the vertical lines.
	lx := 20 * s
	for y := 10 * s; y < 20*s; y++ {
		for d := 3; d <= 5; d++ {
			set(lx-d, y, black)
			set(lx+d, y, black)
		}
	}
	ty := 25*s + s/2
	for x := 5 * s; x < 45*s; x++ {
		for d := -1; d <= 1; d++ {
			set(x, ty+d, black)
		}
	}
	ink, _ := inkMap(img, gridLines{known: true, s: s})
	at := func(x, y int) uint8 { return ink.Pix[y*ink.Stride+x] }
	var bridged, strokes, n int
	for y := 10*s + 2; y < 20*s-2; y++ {
		if y%s == 0 {
			continue // a horizontal line crossing: judged below
		}
		n++
		for x := lx - 2; x <= lx+2; x++ {
			if at(x, y) >= 128 {
				bridged++
				break
			}
		}
		if at(lx-4, y) >= 128 && at(lx+4, y) >= 128 {
			strokes++
		}
	}
	if bridged > 0 {
		t.Errorf("%d of %d rows join the two strokes across the grid line", bridged, n)
	}
	if strokes < n {
		t.Errorf("strokes kept on only %d of %d rows", strokes, n)
	}
	lost := 0
	for x := 6 * s; x < 44*s; x += s {
		if at(x, ty) < 128 {
			lost++
		}
	}
	if lost > 0 {
		t.Errorf("the crossing trace lost its ink on %d of 38 grid lines", lost)
	}
}

// A grid printed with its 5 mm lines only (a fax, a plain laser print; the
// 1 mm lines do not show at all) is taken out of the ink as a full grid
// is, and the trace is kept. The four blank places of every 5 mm block
// used to set the grid's usual level to paper, so the 5 mm lines were all
// kept as ink and read as rows of traces (outside05, a fax, read in the
// wrong layout).
func TestInkMapRemovesMajorOnlyGrid(t *testing.T) {
	const w, h, s = 900, 500, 8.0
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	draw.Draw(img, img.Bounds(), image.White, image.Point{}, draw.Src)
	black := color.NRGBA{0, 0, 0, 255}
	line := func(x, y int) bool { return (x%40 == 0 || x%40 == 1) || (y%40 == 0 || y%40 == 1) }
	trace := func(x int) float64 { return 250 + 60*math.Sin(float64(x)/23) }
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			if line(x, y) {
				img.SetNRGBA(x, y, black)
			}
		}
	}
	for x := 0; x < w; x++ {
		y0, y1 := trace(x), trace(x+1)
		for y := int(math.Min(y0, y1)) - 1; y <= int(math.Max(y0, y1))+1; y++ {
			img.SetNRGBA(x, y, black)
		}
	}
	ink, _ := inkMap(img, gridLines{known: true, s: s})
	var lineN, lineKept int
	for y := 10; y < h-10; y++ {
		for x := 10; x < w-10; x++ {
			if line(x, y) && math.Abs(float64(y)-trace(x)) >= 12 {
				lineN++
				if ink.GrayAt(x, y).Y > 128 {
					lineKept++
				}
			}
		}
	}
	if f := float64(lineKept) / float64(lineN); f > 0.05 {
		t.Errorf("%.0f %% of the 5 mm lines' pixels kept as ink, want under 5 %%", 100*f)
	}
	// Where the trace crosses a line at a slant, the line's band is taken
	// out with it; the tracer bridges such gaps when they are short.
	cols, gap, longest := 0, 0, 0
	for x := 10; x < w-10; x++ {
		y0 := int(math.Round(trace(x)))
		kept := false
		for y := y0 - 2; y <= y0+2; y++ {
			kept = kept || ink.GrayAt(x, y).Y > 128
		}
		if kept {
			cols++
			gap = 0
			continue
		}
		gap++
		longest = max(longest, gap)
	}
	if f := float64(cols) / float64(w-20); f < 0.8 || longest > s {
		t.Errorf("the trace keeps ink in %.0f %% of its columns, longest gap %d px; want 80 %% and gaps up to 1 mm (%v px)", 100*f, longest, s)
	}
}
