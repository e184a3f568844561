package report

import (
	"image"
	"math"
	"testing"

	"tracelift/record"
)

// The paper scales are common practice for a resting ECG: 25 mm/s, 10 mm/mV,
// 1 mm small and 5 mm large squares. 1 in = 25.4 mm = 72 pt (PDF user
// space, ISO 32000-1 §8.3.2.3).

func TestGridLineGeometry(t *testing.T) {
	xs := gridLines(21, gridWMM, MinorMM)
	if len(xs) != 256 {
		t.Fatalf("%d lines over %v mm, want 256", len(xs), gridWMM)
	}
	var majors []float64
	for i, x := range xs {
		if isMajor(i) {
			majors = append(majors, x)
		}
	}
	if len(majors) != 52 {
		t.Fatalf("%d major lines, want 52", len(majors))
	}
	for i := 1; i < len(majors); i++ {
		d := majors[i] - majors[i-1]
		if math.Abs(d-5) > 1e-9 {
			t.Fatalf("major lines %d,%d are %v mm apart", i-1, i, d)
		}
		if pt := mmToPt(d); math.Abs(pt-14.1732) > 1e-4 { // 5/25.4*72
			t.Fatalf("5 mm = %v pt", pt)
		}
	}
	if got := majors[len(majors)-1] - majors[0]; math.Abs(got-255) > 1e-9 {
		t.Errorf("grid width %v mm, want 255 (no drift)", got)
	}
	// 1 s at 25 mm/s and 1 mV at 10 mm/mV.
	if d := timeToX(0, 3, 4) - timeToX(0, 3, 3); d != 25 {
		t.Errorf("1 s = %v mm", d)
	}
	if d := mvToY(100, 0) - mvToY(100, 1); d != 10 {
		t.Errorf("1 mV = %v mm up", d)
	}
}

// probeRecord holds a scale probe (not clinical data): every lead flat at
// 0 mV with a 1 mV triangle 20 ms wide at each whole second, 10 s at
// 500 Hz.
func probeRecord() *record.Record {
	rec := &record.Record{Name: "probe"}
	for _, l := range record.Standard12 {
		mv := make([]float64, 5000)
		for k := 0; k < 10; k++ {
			c := k*500 + 250 // spikes at 0.5 s, 1.5 s, ...
			for j := -5; j <= 5; j++ {
				mv[c+j] = 1 - math.Abs(float64(j))/5
			}
		}
		rec.Signals = append(rec.Signals, record.Signal{Lead: l, RateHz: 500, MV: mv})
	}
	return rec
}

func lum(img image.Image, x, y int) float64 {
	r, g, b, _ := img.At(x, y).RGBA()
	return (0.299*float64(r) + 0.587*float64(g) + 0.114*float64(b)) / 257
}

// runsBelow returns the centres of the runs of pixels along a row (or a
// column) darker than thr.
func runsBelow(n int, at func(int) float64, thr float64) []float64 {
	var out []float64
	start := -1
	for i := 0; i <= n; i++ {
		dark := i < n && at(i) < thr
		switch {
		case dark && start < 0:
			start = i
		case !dark && start >= 0:
			out = append(out, float64(start+i-1)/2)
			start = -1
		}
	}
	return out
}

// TestPrintedScale rasterizes page 1 with poppler at 254 dpi, exactly
// 10 px per mm, and measures the grid and the probe's spikes in pixels:
// major lines 50 px (5 mm) apart, spikes 250 px (1 s at 25 mm/s) apart
// and 100 px (1 mV at 10 mm/mV) tall.
func TestPrintedScale(t *testing.T) {
	if testing.Short() {
		t.Skip("rasterizes a full page at 254 dpi")
	}
	for _, paper := range []string{"a4", "letter"} {
		t.Run(paper, func(t *testing.T) {
			s := &Summary{Record: probeRecord(), Caution: cautionText}
			img := rasterize(t, renderTo(t, s, paper), 254, 1)
			p, _ := PaperByName(paper)
			l := newLayout(p)
			const pxPerMM = 10.0
			if w := img.Bounds().Dx(); math.Abs(float64(w)-p.WidthMM*pxPerMM) > 1 {
				t.Fatalf("raster width %d px, want %.0f", w, p.WidthMM*pxPerMM)
			}
			// Grid: a row half a millimetre below the block's top edge
			// crosses only vertical lines.
			y := int(math.Round((l.gridY + 0.5) * pxPerMM))
			x0 := int(l.gridX*pxPerMM) - 5
			x1 := int((l.gridX+gridWMM)*pxPerMM) + 5
			majors := runsBelow(x1-x0, func(i int) float64 { return lum(img, x0+i, y) }, 200)
			if len(majors) != 52 {
				t.Fatalf("found %d major lines, want 52", len(majors))
			}
			for i := 1; i < len(majors); i++ {
				if d := majors[i] - majors[i-1]; math.Abs(d-50) > 1 {
					t.Errorf("major lines %d,%d: %.1f px apart, want 50 (5 mm)", i-1, i, d)
				}
			}
			if span := majors[len(majors)-1] - majors[0]; math.Abs(span-2550) > 1.5 {
				t.Errorf("grid spans %.1f px, want 2550 (255 mm)", span)
			}
			minors := runsBelow(x1-x0, func(i int) float64 { return lum(img, x0+i, y) }, 240)
			if len(minors) != 256 {
				t.Errorf("found %d lines in all, want 256 (every mm)", len(minors))
			}
			// Spikes on the rhythm strip.
			base := l.gridY + rowMM*float64(gridRows-1) + rowMM*baseFrac
			yTop := int(math.Round((base - 9) * pxPerMM)) // 0.9 mV: only spikes reach it
			sx0 := int((l.gridX+pulseMM)*pxPerMM) + 3     // past the pulse's falling edge
			spikes := runsBelow(x1-sx0, func(i int) float64 { return lum(img, sx0+i, yTop) }, 120)
			if len(spikes) != 10 {
				t.Fatalf("found %d spikes at 0.9 mV, want 10", len(spikes))
			}
			for i, c := range spikes {
				wantX := 0.5*SpeedMMPerS*pxPerMM + float64(i)*250 - 3
				if math.Abs(c-wantX) > 2 {
					t.Errorf("spike %d at %.1f px from the strip's start, want %.0f", i, c, wantX)
				}
				// Height: the topmost trace pixel within 4 px of the
				// spike's column against the baseline row found between
				// spikes.
				col := sx0 + int(math.Round(c))
				topY := -1
			scan:
				for yy := int((base - 12) * pxPerMM); yy < int(base*pxPerMM); yy++ {
					for xx := col - 4; xx <= col+4; xx++ {
						if lum(img, xx, yy) < 120 {
							topY = yy
							break scan
						}
					}
				}
				flat := sx0 + int(math.Round(c)) + 125 // half-way to the next spike
				if i == len(spikes)-1 {
					flat -= 250
				}
				lines := runsBelow(60, func(j int) float64 { return lum(img, flat, int(base*pxPerMM)-30+j) }, 120)
				if topY < 0 || len(lines) != 1 {
					t.Fatalf("spike %d: top %d, baseline runs %v", i, topY, lines)
				}
				baseY := float64(int(base*pxPerMM)-30) + lines[0]
				h := baseY - float64(topY)
				if i == 0 {
					t.Logf("spike 0 at %.1f px, %.1f px tall; major spacing %.2f px", c+3, h, (majors[len(majors)-1]-majors[0])/51)
				}
				// Tolerance: half the 0.28 mm line width and a pixel.
				if math.Abs(h-100) > lwTrace/2*pxPerMM+1 {
					t.Errorf("spike %d is %.1f px tall, want 100 (1 mV)", i, h)
				}
			}
		})
	}
}

func TestPathMM(t *testing.T) {
	s := &record.Signal{Lead: "II", RateHz: 1000, StartS: 2, MV: make([]float64, 1000)}
	for i := range s.MV {
		s.MV[i] = 0.25 // offset: the median is drawn on the baseline
	}
	s.MV[500] = 1.25 // a 1 ms peak must survive thinning
	for i := 700; i < 720; i++ {
		s.MV[i] = math.NaN()
	}
	paths := pathMM(s, 2, 3, 10, 50)
	if len(paths) != 2 {
		t.Fatalf("%d polylines, want 2 (the gap breaks the line)", len(paths))
	}
	top, n := 1e9, 0
	var topX float64
	for _, p := range paths {
		n += len(p)
		for _, q := range p {
			if q[1] < top {
				top, topX = q[1], q[0]
			}
		}
	}
	if math.Abs(top-40) > 1e-9 || math.Abs(topX-(10+0.5*25)) > 1e-9 {
		t.Errorf("peak drawn at (%v, %v), want (22.5, 40)", topX, top)
	}
	if n > 2*25/0.1+4 {
		t.Errorf("%d points for 25 mm, thinning to 0.1 mm buckets failed", n)
	}
	if first := paths[0][0]; first[0] != 10 || first[1] != 50 {
		t.Errorf("first point %v, want (10, 50)", first)
	}
	if end := paths[1][len(paths[1])-1][0]; end > 10+25+1e-9 || end < 10+25-0.2 {
		t.Errorf("last x %v, want just under 35", end)
	}
}

func TestChooseStretch(t *testing.T) {
	// A lead traced from the second column of a 3×4 page holds 2.5 s from
	// 2.5 s; a lead of a 6×2 page from the second half holds 5 s from 5 s.
	mk := func(start, dur float64) record.Signal {
		return record.Signal{Lead: "aVR", RateHz: 100, StartS: start, MV: make([]float64, int(dur*100))}
	}
	rec := &record.Record{Signals: []record.Signal{mk(2.5, 2.5)}}
	if st := chooseStretch(rec, "aVR", 2.5, 2.5); !st.ok || st.t0 != 2.5 {
		t.Errorf("column 2: %+v", st)
	}
	rec.Signals[0] = mk(5, 5)
	if st := chooseStretch(rec, "aVR", 2.5, 2.5); !st.ok || st.t0 != 5 {
		t.Errorf("lead recorded later: %+v, want its own start 5 s", st)
	}
	if st := chooseStretch(rec, "V1", 0, 2.5); st.ok {
		t.Errorf("absent lead drawn: %+v", st)
	}
	if l := rhythmLead(rec, ""); l != "aVR" {
		t.Errorf("rhythm lead %q, want the only lead", l)
	}
}
