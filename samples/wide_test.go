package samples

import (
	"bytes"
	"encoding/binary"
	"image"
	"math"
	"math/rand"
	"testing"

	"golang.org/x/image/tiff"

	"tracelift/samples/dipole"
)

// darkAt reports whether the pixel is ink (green channel below 128).
func darkAt(img *image.NRGBA, x, y int) bool {
	if !(image.Point{x, y}).In(img.Rect) {
		return false
	}
	return img.Pix[img.PixOffset(x, y)+1] < 128
}

// inkRuns returns the centres (px, continuous) of the runs of ink along
// row y between x0 and x1.
func inkRuns(img *image.NRGBA, y, x0, x1 int) []float64 {
	var out []float64
	start := -1
	for x := x0; x <= x1; x++ {
		d := x < x1 && darkAt(img, x, y)
		if d && start < 0 {
			start = x
		}
		if !d && start >= 0 {
			out = append(out, float64(start+x)/2)
			start = -1
		}
	}
	return out
}

// The calibration pulse is 1 mV high (common practice). Where the trace
// leaves the pulse's falling edge, the truth's time 0 of each row is that
// edge: measured on the picture, half-way up the pulse, it must lie within
// a pixel of Truth.RowT0XPx (1 px at 300 dpi is 3.4 ms at 25 mm/s, inside
// the 4 ms asked of time 0), and ink must run on along the baseline right
// after it (no gap). The same holds with the pulse at the right end,
// where time 0 is the trace's first ink.
func TestPulsePlacesKeepTimeZero(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 5, HeartRateBPM: 60})
	for _, place := range []PulsePlace{PulseGapLeft, PulseJoinedLeft, PulseGapRight, PulseJoinedRight} {
		for _, ms := range []float64{200, 100} {
			st := plainStyle()
			st.PulsePlace, st.PulseMS = place, ms
			p, err := Render(rec, st)
			if err != nil {
				t.Fatal(err)
			}
			tr := p.Truth
			if tr.PulseJoined != place.Joined() || len(tr.RowT0XPx) != 4 || len(tr.Pulses) != 4 {
				t.Fatalf("place %d: joined %v, %d rows' time 0, %d pulses", place, tr.PulseJoined, len(tr.RowT0XPx), len(tr.Pulses))
			}
			hw := st.TraceWidthMM * tr.CleanPxPerMM / 2
			for _, pn := range tr.Panels {
				if pn.Col != 0 {
					continue
				}
				t0x := tr.RowT0XPx[pn.Row]
				if math.Abs(pn.Box[0]-t0x) > 1e-9 {
					t.Errorf("place %d row %d: panel starts at %.2f, time 0 at %.2f", place, pn.Row, pn.Box[0], t0x)
				}
				var pb [4]float64
				for _, b := range tr.Pulses {
					if math.Abs(b[3]-pn.BaselineYPx) < 1 {
						pb = b
					}
				}
				// Pulse width on the page: ms at 25 mm/s.
				if w := (pb[2] - pb[0]) / tr.CleanPxPerMM; math.Abs(w-ms/1000*25) > 1e-6 {
					t.Errorf("place %d: pulse %.3f mm wide, want %.3f", place, w, ms/1000*25)
				}
				mid := int((pb[1] + pb[3]) / 2)
				runs := inkRuns(p.Image, mid, int(pb[0]-2*hw-3), int(pb[2]+2*hw+3))
				if len(runs) < 2 {
					t.Fatalf("place %d row %d: %d strokes across the pulse half-way up", place, pn.Row, len(runs))
				}
				rise, fall := runs[0], runs[len(runs)-1]
				if math.Abs(rise-pb[0]) > 1 || math.Abs(fall-pb[2]) > 1 {
					t.Errorf("place %d row %d: pulse edges at %.1f, %.1f px, truth %.1f, %.1f", place, pn.Row, rise, fall, pb[0], pb[2])
				}
				base := int(pn.BaselineYPx)
				switch place {
				case PulseJoinedLeft:
					if math.Abs(fall-t0x) > 1 {
						t.Errorf("row %d: falling edge at %.2f px, time 0 at %.2f px", pn.Row, fall, t0x)
					}
					// No gap: the trace's ink starts at the edge.
					for x := int(t0x) + 1; x < int(t0x+0.5*tr.CleanPxPerMM); x++ {
						if !inkNear(p.Image, x, base, int(0.3*25*st.GainMMPerMV/10*tr.CleanPxPerMM)) {
							t.Errorf("row %d: no ink at x=%d just after the falling edge", pn.Row, x)
							break
						}
					}
				case PulseGapLeft:
					if t0x-fall < 2*tr.CleanPxPerMM {
						t.Errorf("row %d: gap of %.1f px between pulse and trace", pn.Row, t0x-fall)
					}
				default:
					// The trace's first ink sits half a stroke left of time 0.
					first := -1
					for x := int(t0x - 3*hw - 2); x < int(t0x+3*hw+2); x++ {
						if inkNear(p.Image, x, base, int(3*tr.CleanPxPerMM)) {
							first = x
							break
						}
					}
					if first < 0 || math.Abs(float64(first)+0.5-(t0x-hw)) > 1 {
						t.Errorf("place %d row %d: first ink at %d, time 0 at %.2f (stroke half-width %.2f)", place, pn.Row, first, t0x, hw)
					}
					if pb[0] < pn.Box[0] {
						t.Errorf("place %d: pulse at %.1f left of the trace", place, pb[0])
					}
				}
			}
		}
	}
}

func inkNear(img *image.NRGBA, x, y, r int) bool {
	for yy := y - r; yy <= y+r; yy++ {
		if darkAt(img, x, yy) {
			return true
		}
	}
	return false
}

// Strip paper has no margins: the grid reaches all four edges of the
// picture, the one band spans the paper's height, and the label is the
// strip's lead.
func TestStripPaperHasNoMargin(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 2})
	st := DefaultStyle()
	st.Layout, st.Strip, st.RhythmLeads = Layout1x1, true, []string{"V5"}
	st.PaperWMM, st.PaperHMM = 260, 55
	st.MarginsMM = [4]float64{10, 10, 10, 10} // ignored on strip paper
	st.Header = ""
	p, err := Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	W, H := p.Image.Rect.Dx(), p.Image.Rect.Dy()
	if want := int(math.Round(55 * 300 / 25.4)); H != want {
		t.Errorf("strip %d px high, want %d (55 mm at 300 dpi)", H, want)
	}
	pn := p.Truth.Panels
	if len(pn) != 1 || pn[0].Lead != "V5" || pn[0].Box[1] != 0 || math.Abs(pn[0].Box[3]-float64(H)) > 0.5 {
		t.Fatalf("panels %+v", pn)
	}
	gridPx := func(x, y int) bool {
		c := p.Image.Pix[p.Image.PixOffset(x, y):]
		return c[0] > c[1]+40 // red grid on white paper
	}
	edges := map[string]int{}
	for x := 0; x < W; x++ {
		if gridPx(x, 0) {
			edges["top"]++
		}
		if gridPx(x, H-1) {
			edges["bottom"]++
		}
	}
	for y := 0; y < H; y++ {
		if gridPx(0, y) {
			edges["left"]++
		}
		if gridPx(W-1, y) {
			edges["right"]++
		}
	}
	for _, e := range []string{"top", "bottom", "left", "right"} {
		// A grid line every mm: at least one crossing per 2 mm of edge.
		n := float64(W)
		if e == "left" || e == "right" {
			n = float64(H)
		}
		if float64(edges[e]) < n/p.Truth.CleanPxPerMM/2 {
			t.Errorf("%s edge: %d grid pixels, the grid should run to it", e, edges[e])
		}
	}
	// A strip needs the 1x1 layout.
	st.Layout = Layout3x4R1
	if _, err := Render(rec, st); err == nil {
		t.Error("strip paper with a 3x4+1 layout rendered")
	}
}

// A fax with non-square pixels keeps them and says so: 204 × 98 dpi is a
// fax resolution in use (ITU-T T.4 standard mode, from memory). The
// picture's scale is the resolution's, the TIFF carries both numbers, and
// a fax document holds a cover sheet first and the ECG second.
func TestFaxDocumentCarriesItsResolution(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 3})
	p, err := Render(rec, DefaultStyle())
	if err != nil {
		t.Fatal(err)
	}
	d := Degradation{Name: "faxdoc", Fax: true, FaxDPIX: 204, FaxDPIY: 98, FaxGridDrop: true, FileTIFF: true, Cover: true, Seed: 4}
	q, err := Degrade(p, d)
	if err != nil {
		t.Fatal(err)
	}
	tr := q.Truth
	if tr.FileDPIX != 204 || tr.FileDPIY != 98 || tr.PageIndex != 1 || tr.PageCount != 2 || q.Cover == nil {
		t.Fatalf("file dpi %v × %v, page %d of %d, cover %v", tr.FileDPIX, tr.FileDPIY, tr.PageIndex, tr.PageCount, q.Cover != nil)
	}
	if math.Abs(tr.PxPerMMX-204/25.4) > 0.01 || math.Abs(tr.PxPerMMY-98/25.4) > 0.01 {
		t.Errorf("scale %.3f × %.3f px/mm, want %.3f × %.3f", tr.PxPerMMX, tr.PxPerMMY, 204/25.4, 98/25.4)
	}
	if w := float64(q.Image.Rect.Dx()) / tr.PxPerMMX; math.Abs(w-297) > 1 {
		t.Errorf("page %.1f mm wide, want 297", w)
	}
	// Grid dropped: almost every pixel is white or black, and the ink is
	// sparse (the trace alone, not a grid every mm).
	var black int
	for i := 0; i < len(q.Image.Pix); i += 4 {
		if q.Image.Pix[i] < 128 {
			black++
		}
	}
	if f := float64(black) / float64(len(q.Image.Pix)/4); f > 0.06 {
		t.Errorf("%.1f %% black: the grid did not drop out", 100*f)
	}
	sc := SuiteCase{Condition: "faxdoc", Degradation: d}
	name, b, err := sc.File(q)
	if err != nil || name != "case.tif" {
		t.Fatal(name, err)
	}
	le := binary.LittleEndian
	var offs []uint32
	for off := le.Uint32(b[4:]); off != 0 && len(offs) < 5; {
		offs = append(offs, off)
		n := uint32(le.Uint16(b[off:]))
		res := map[uint16]float64{}
		for k := uint32(0); k < n; k++ {
			e := b[off+2+12*k:]
			if tag := le.Uint16(e); tag == 282 || tag == 283 {
				ro := le.Uint32(e[8:])
				res[tag] = float64(le.Uint32(b[ro:])) / float64(le.Uint32(b[ro+4:]))
			}
		}
		if res[282] != 204 || res[283] != 98 {
			t.Errorf("page %d declares %v × %v dpi", len(offs), res[282], res[283])
		}
		off = le.Uint32(b[off+2+12*n:])
	}
	if len(offs) != 2 {
		t.Fatalf("%d pages in the TIFF, want 2", len(offs))
	}
	// Page 2, read by x/image/tiff with the header pointed at it, is the
	// ECG page pixel for pixel.
	b2 := append([]byte(nil), b...)
	le.PutUint32(b2[4:], offs[1])
	img, err := tiff.Decode(bytes.NewReader(b2))
	if err != nil {
		t.Fatal(err)
	}
	if img.Bounds().Size() != q.Image.Rect.Size() {
		t.Fatalf("page 2 is %v, the ECG page %v", img.Bounds().Size(), q.Image.Rect.Size())
	}
	bad := 0
	for y := 0; y < q.Image.Rect.Dy(); y += 2 {
		for x := 0; x < q.Image.Rect.Dx(); x += 2 {
			r, _, _, _ := img.At(x, y).RGBA()
			if (r>>8 < 128) != (q.Image.Pix[q.Image.PixOffset(x, y)] < 128) {
				bad++
			}
		}
	}
	if bad > 0 {
		t.Errorf("%d sampled pixels of page 2 differ from the ECG page", bad)
	}
	first, err := tiff.Decode(bytes.NewReader(b))
	if err != nil || first.Bounds().Size() != q.Cover.Rect.Size() {
		t.Errorf("page 1: %v, %v; want the cover %v", err, first.Bounds(), q.Cover.Rect.Size())
	}
}

// The bend of a curled sheet is smooth and invertible, and the truth
// (ToImage) carries page points to where they landed in the photo; the
// hard presets' geometry is checked the same way as the classic ones'.
func TestHardConditionsMapMarkers(t *testing.T) {
	t.Parallel()
	for _, name := range HardConditions {
		for s := int64(1); s <= 2; s++ {
			d := Condition(name, rand.New(rand.NewSource(s)))
			d.Speckle, d.Creases, d.Shadow, d.Glare, d.Marks, d.MotionPx = 0, 0, 0, 0, 0, 0
			if name == "curled" {
				d.Curl = 1
			}
			p, pts := markerPage(1200, 850, 4)
			q, err := Degrade(p, d)
			if err != nil {
				t.Fatal(name, err)
			}
			if b := q.Truth.Bend; b != nil {
				for y := 0.0; y <= b.H; y += b.H / 9 {
					for x := 0.0; x <= b.W; x += b.W / 13 {
						u, v := b.Forward(x, y)
						bx, by := b.Inverse(u, v)
						if math.Hypot(bx-x, by-y) > 0.01 {
							t.Fatalf("bend: (%.1f, %.1f) comes back as (%.3f, %.3f)", x, y, bx, by)
						}
					}
				}
				for _, e := range []EdgeCurl{b.Left, b.Right} {
					if a := e.EdgeAngleDeg(); e.Radius > 0 && (a < 45 || a > 62) {
						t.Errorf("edge rises %.1f°, want 45–62°", a)
					}
				}
			} else if name == "curled" {
				t.Fatal("curled page without a bend in its truth")
			}
			for _, pt := range pts {
				ex, ey := q.Truth.ToImage(pt[0], pt[1])
				gx, gy, ok := darkCentroid(q.Image, ex, ey, 12)
				if !ok {
					t.Fatalf("%s seed %d: no mark near (%.1f, %.1f)", name, s, ex, ey)
				}
				tol := 0.7
				if d.Fax || d.ChatApp {
					tol = 1.0 // binarized at 98–100 dpi down, or scaled to a quarter and JPEG-coded
				}
				if e := math.Hypot(gx-ex, gy-ey); e > tol {
					t.Errorf("%s seed %d: mark at (%.2f, %.2f), truth says (%.2f, %.2f), off %.2f px", name, s, gx, gy, ex, ey, e)
				}
			}
		}
	}
}

// The new pens keep the stroke centred on the truth: square ends, a wobble
// of 0.01 mm, ink spreading by 0.08 mm, and a thermal head's 1/8 mm dots
// (whose lattice moves a flat stroke by up to half a dot, 1/16 mm or
// 0.74 px at 300 dpi, the same all along a row: within 0.85 px).
func TestPensKeepTheTrace(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 11, HeartRateBPM: 75, QRSAxisDeg: 30})
	for _, tc := range []struct {
		name string
		mod  func(*Style)
	}{
		{"butt", func(s *Style) { s.Pen = PenButt }},
		{"wobble", func(s *Style) { s.PenJitterMM = 0.01; s.Seed = 3 }},
		{"spread", func(s *Style) { s.InkSpreadMM = 0.08 }},
		{"thermal", func(s *Style) { s.Pen = PenThermal; s.TraceWidthMM = 0.3 }},
	} {
		t.Run(tc.name, func(t *testing.T) {
			st := plainStyle()
			tc.mod(&st)
			p, err := Render(rec, st)
			if err != nil {
				t.Fatal(err)
			}
			if tc.name == "thermal" {
				checkPixelsTol(t, p, st, 0.85, 0.9)
				return
			}
			checkPixels(t, p, st)
		})
	}
}

// A gap at the column joins leaves the ink off there and the truth says
// so: each panel's signal starts half the gap after its column's start.
func TestBoundaryGapTruth(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 7})
	st := plainStyle()
	st.Separators, st.Boundary, st.BoundaryGapMS = true, BoundaryGap, 60
	p, err := Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	tr := p.Truth
	for _, pn := range tr.Panels {
		if pn.Rhythm || pn.Col == 0 {
			continue
		}
		s := tr.Signals.Lead(pn.Lead)
		if s == nil {
			t.Fatalf("no truth for %s", pn.Lead)
		}
		if math.Abs(s.StartS-(pn.T0S+0.03)) > 1.5/s.RateHz {
			t.Errorf("%s: truth starts at %.4f s, want %.4f", pn.Lead, s.StartS, pn.T0S+0.03)
		}
		// No ink across the band at the join itself.
		x := int(pn.Box[0])
		for y := int(pn.Box[1]); y < int(pn.Box[3]); y++ {
			if darkAt(p.Image, x, y) {
				t.Errorf("%s: ink at the join (%d, %d)", pn.Lead, x, y)
				break
			}
		}
	}
}

// Every hard preset renders a suite page and a file that decodes, the
// same every time.
func TestHardSuiteCases(t *testing.T) {
	if testing.Short() {
		t.Skip("renders eight pages")
	}
	t.Parallel()
	for i, cond := range HardConditions {
		sc := NewSuiteCase(7, i, HardConditions, nil)
		if sc.Condition != cond {
			t.Fatalf("case %d is %s", i, sc.Condition)
		}
		sc.Style.DPI = math.Min(sc.Style.DPI, 150)
		po, err := sc.Printout()
		if err != nil {
			t.Fatalf("%s: %v", cond, err)
		}
		name, b, err := sc.File(po)
		if err != nil || len(b) == 0 {
			t.Fatalf("%s: %s %v", cond, name, err)
		}
		if name != "case.tif" {
			if _, _, err := image.Decode(bytes.NewReader(b)); err != nil {
				t.Errorf("%s: %s does not decode: %v", cond, name, err)
			}
		}
		if cond == "marks" && len(po.Truth.Marks) == 0 {
			t.Errorf("marks: none recorded")
		}
		again, _ := sc.Printout()
		if !bytes.Equal(again.Image.Pix, po.Image.Pix) {
			t.Errorf("%s: two renders differ", cond)
		}
	}
}
