package calib

import (
	"context"
	"image"
	"image/color"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"tracelift/samples"
)

// ptbPage renders 10 s of the open PTB record s0010_re (../shared/data)
// as a 3x4+1 printout at dpi.
func ptbPage(t testing.TB, dpi float64, style ...func(*samples.Style)) *samples.Printout {
	t.Helper()
	st := samples.DefaultStyle()
	st.DPI = dpi
	for _, f := range style {
		f(&st)
	}
	p, err := samples.RenderRecordFile("../../shared/data/ptb-s0010_re/s0010_re.hea", 2, 10, st)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// A document of a cover sheet, an ECG page and another cover sheet: the
// pages are counted, and the screen passes over the cover sheets only.
func TestDocumentPagesScreened(t *testing.T) {
	p := ptbPage(t, 200)
	data, err := samples.WriteTIFF([]samples.TIFFPage{
		{Image: samples.CoverSheet(210, 297, 200, 1), DPIX: 200, DPIY: 200, Bilevel: true},
		{Image: p.Image, DPIX: 200, DPIY: 200},
		{Image: samples.CoverSheet(297, 210, 200, 2), DPIX: 200, DPIY: 200},
	})
	if err != nil {
		t.Fatal(err)
	}
	doc, err := NewDocument(data, "fax.tif", LoadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if doc.Pages != 3 || doc.Format != "tiff" {
		t.Fatalf("%d pages of %s, want 3 of tiff", doc.Pages, doc.Format)
	}
	for i, want := range []bool{false, true, false} {
		pg, err := doc.Preview(i)
		if err != nil {
			t.Fatal(err)
		}
		if s := Screen(pg); s.ECG != want {
			t.Errorf("page %d: ECG %v (%s), want %v", i+1, s.ECG, s.Why, want)
		}
	}
	if _, err := doc.Page(3); err == nil {
		t.Error("page 4 of 3 decoded")
	}
}

// A fax at 204 × 98 dpi (ITU-T T.4 normal resolution, from memory): the
// page rendered at 204 dpi, its rows averaged down to 98 dpi and cut to
// black and white, written as a 1-bit TIFF stating XResolution 204,
// YResolution 98, ResolutionUnit inch. Decode stretches the rows to
// square pixels, and the grid then measures the renderer's scale (its
// truth, 204 dpi = 8.031 px/mm on both axes after the stretch) within
// 3 %; the file's resolution agrees with the grid.
func TestFax204x98Scale(t *testing.T) {
	for _, c := range []struct {
		name string
		grid color.NRGBA // the 5 mm lines; the 1 mm ones are paler
		line float64     // width of the 5 mm lines, mm
	}{
		// A pink grid drops out of the black-and-white cut (the scale then
		// comes from the calibration pulse); a dark grey one with bold
		// 5 mm lines stays.
		{"pink grid", samples.DefaultStyle().GridColor, 0},
		{"grey grid", color.NRGBA{40, 40, 40, 255}, 0.3},
	} {
		t.Run(c.name, func(t *testing.T) {
			p := ptbPage(t, 204, func(st *samples.Style) {
				st.GridColor = c.grid
				if c.line > 0 {
					st.MajorLineMM = c.line
				}
			})
			faxScale(t, p, c.name == "grey grid")
		})
	}
}

func faxScale(t *testing.T, p *samples.Printout, gridKept bool) {
	fax := samples.FaxRows(p.Image, 98.0/204)
	data, err := samples.WriteTIFF([]samples.TIFFPage{{Image: fax, DPIX: 204, DPIY: 98, Bilevel: true}})
	if err != nil {
		t.Fatal(err)
	}
	check := func(t *testing.T, data []byte) {
		pg, err := Decode(data, "fax.tif", LoadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if st := pg.Stated; st.X != 204 || st.Y != 98 || st.Unit != "inch" || !st.Resampled() {
			t.Fatalf("stated %+v, want 204 × 98 per inch, resampled", st)
		}
		if b := pg.Image.Bounds(); math.Abs(float64(b.Dy())-float64(fax.Rect.Dy())*204/98) > 1 {
			t.Fatalf("height %d after stretching, want %d × 204/98", b.Dy(), fax.Rect.Dy())
		}
		res, err := Detect(context.Background(), pg, Options{})
		if err != nil {
			t.Fatal(err)
		}
		want := p.Truth.PxPerMMX // 204 dpi, the render's own scale on both axes
		if math.Abs(p.Truth.PxPerMMY-want) > 1e-9 {
			t.Fatalf("render scales %v × %v differ", p.Truth.PxPerMMX, p.Truth.PxPerMMY)
		}
		ex, ey := res.PxPerMMX/want-1, res.PxPerMMY/want-1
		t.Logf("scale %.3f × %.3f px/mm (source %s), truth %.3f: %+.2f %% and %+.2f %%", res.PxPerMMX, res.PxPerMMY, res.Source, want, 100*ex, 100*ey)
		if math.Abs(ex) > 0.03 || math.Abs(ey) > 0.03 {
			t.Errorf("scale off by %+.1f %% × %+.1f %%, want within 3 %%", 100*ex, 100*ey)
		}
		if gridKept && res.Source != "grid" {
			t.Errorf("scale from %s, want the grid (it is printed grey and survives the cut)", res.Source)
		}
		for _, w := range res.Warnings {
			t.Logf("warning: %s", w)
			if strings.Contains(w, "the file states") {
				t.Errorf("the grid disagrees with the file's resolution: %s", w)
			}
		}
	}
	t.Run("uncompressed", func(t *testing.T) { check(t, data) })
	// The same page as a CCITT Group 4 fax, compressed by ImageMagick (a
	// general-purpose reference tool) when it is installed; it keeps the
	// stated resolution.
	t.Run("group4", func(t *testing.T) {
		conv, err := exec.LookPath("convert")
		if err != nil {
			t.Skip("ImageMagick convert not installed")
		}
		dir := t.TempDir()
		in, out := filepath.Join(dir, "in.tif"), filepath.Join(dir, "g4.tif")
		if err := os.WriteFile(in, data, 0o644); err != nil {
			t.Fatal(err)
		}
		if b, err := exec.Command(conv, in, "-compress", "Group4", out).CombinedOutput(); err != nil {
			t.Skipf("convert failed: %v %s", err, b)
		}
		g4, err := os.ReadFile(out)
		if err != nil {
			t.Fatal(err)
		}
		check(t, g4)
	})
}

// Stated resolutions that are no pixel shape are not used, and nothing
// is resampled for them.
func TestStatedResolutionRefused(t *testing.T) {
	img := tinyImage(40, 30)
	for _, c := range []struct {
		x, y float64
		want bool
	}{{204, 98, true}, {300, 300, false}, {1000, 10, false}, {0, 98, false}} {
		data, err := samples.WriteTIFF([]samples.TIFFPage{{Image: img, DPIX: c.x, DPIY: c.y}})
		if err != nil {
			t.Fatal(err)
		}
		pg, err := Decode(data, "x.tif", LoadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if got := pg.Stated.Resampled(); got != c.want {
			t.Errorf("%v × %v dpi: resampled %v, want %v (%+v)", c.x, c.y, got, c.want, pg.Stated)
		}
		if !c.want && pg.Image.Bounds().Dy() != 30 {
			t.Errorf("%v × %v dpi: height %d, want 30", c.x, c.y, pg.Image.Bounds().Dy())
		}
	}
}

// The quick screen of one page (the cost a document pays per page before
// its ECG page is read): an A4 page at 200 dpi. Goal: well under 0.1 s,
// so a 10-page document is screened within a second.
func BenchmarkScreen(b *testing.B) {
	pg := &Page{Image: ptbPage(b, 200).Image}
	b.ReportAllocs()
	for b.Loop() {
		Screen(pg)
	}
}

// Loading a scanned A4 PDF page (a JPEG image in a PDF, rasterised by
// poppler at 300 dpi). Goal: a small part of the 2 s a scanned PDF page
// may take on one core.
func BenchmarkScannedPDFPage(b *testing.B) {
	if _, err := exec.LookPath("pdftoppm"); err != nil {
		b.Skip("poppler-utils not installed")
	}
	data, err := samples.ScannedPDF([]image.Image{ptbPage(b, 300).Image}, 300, 85)
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if _, err := Decode(data, "scan.pdf", LoadOptions{}); err != nil {
			b.Fatal(err)
		}
	}
}
