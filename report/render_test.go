package report

import (
	"bytes"
	"image"
	"image/png"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"tracelift/record"
)

// cautionText is the project's required caution (pipeline.Caution).
const cautionText = "Not a diagnostic device. Every measurement is to be reviewed by a qualified clinician; local protocols and licensed practice come first."

// summaryOf wraps a record with fixed rows. The rows here only exercise
// the layout: which numbers the page shows is checked against pdftotext,
// not judged clinically.
func summaryOf(rec *record.Record) *Summary {
	s := &Summary{
		Header:  []Field{{"Name", ""}, {"Identifier", ""}, {"Recorded", "01/10/1990"}},
		Facts:   []string{"source: s0010_re.hea"},
		Record:  rec,
		Caution: cautionText,
		Axes:    []Axis{{"QRS", 17, 6}, {"P", 55, 12}, {"T", nan(), nan()}},
		Measurements: []Row{
			{Name: "Heart rate", Value: "76", Uncertainty: "2", Unit: "bpm"},
			{Name: "QTc", Value: "441", Uncertainty: "12", Unit: "ms", Note: "Bazett"},
		},
	}
	for _, l := range rec.Leads() {
		s.Quality = append(s.Quality, Quality{Lead: l, Confidence: 1})
	}
	return s
}

// pdfInfo runs poppler's pdfinfo and returns its fields.
func pdfInfo(t *testing.T, path string) map[string]string {
	t.Helper()
	bin := needTool(t, "pdfinfo")
	out, err := exec.Command(bin, path).Output()
	if err != nil {
		t.Fatalf("pdfinfo %s: %v", path, err)
	}
	m := map[string]string{}
	for _, line := range strings.Split(string(out), "\n") {
		if k, v, ok := strings.Cut(line, ":"); ok {
			m[strings.TrimSpace(k)] = strings.TrimSpace(v)
		}
	}
	return m
}

// TestPaperSizes checks the page size poppler reads. A4 is 210 × 297 mm
// (ISO 216) = 595.28 × 841.89 pt; US Letter is 8.5 × 11 in (ANSI/ASME
// Y14.1) = 612 × 792 pt (1 pt = 1/72 in, PDF 1.7 ISO 32000-1 §8.3.2.3).
// Both pages are landscape: width > height.
func TestPaperSizes(t *testing.T) {
	rec := readPTB(t)
	for _, tc := range []struct {
		paper string
		w, h  float64
	}{
		{"a4", 841.89, 595.28},
		{"letter", 792, 612},
	} {
		t.Run(tc.paper, func(t *testing.T) {
			info := pdfInfo(t, renderTo(t, summaryOf(rec), tc.paper))
			re := regexp.MustCompile(`^([\d.]+) x ([\d.]+) pts`)
			m := re.FindStringSubmatch(info["Page size"])
			if m == nil {
				t.Fatalf("pdfinfo page size %q", info["Page size"])
			}
			w, _ := strconv.ParseFloat(m[1], 64)
			h, _ := strconv.ParseFloat(m[2], 64)
			if math.Abs(w-tc.w) > 0.01 || math.Abs(h-tc.h) > 0.01 {
				t.Errorf("page %v × %v pt, want %v × %v", w, h, tc.w, tc.h)
			}
			if info["Pages"] != "1" {
				t.Errorf("pages = %s, want 1 without a source image", info["Pages"])
			}
		})
	}
}

// TestTextOfPage checks with poppler's pdftotext that the numbers and
// the caution given to Render can be read back from the page.
func TestTextOfPage(t *testing.T) {
	bin := needTool(t, "pdftotext")
	path := renderTo(t, summaryOf(readPTB(t)), "a4")
	out, err := exec.Command(bin, "-layout", path, "-").Output()
	if err != nil {
		t.Fatalf("pdftotext: %v", err)
	}
	txt := strings.Join(strings.Fields(string(out)), " ")
	for _, want := range []string{
		"Heart rate", "76 ± 2", "441 ± 12", "+17°", "± 6°", "+55°",
		"aVL -30°", "aVF +90°", "aVR -150°", "II +60°", "III +120°", "I 0°",
		"25 mm/s", "10 mm/mV", "01/10/1990",
		"Not a diagnostic device.", "licensed practice come first.",
	} {
		if !strings.Contains(txt, want) {
			t.Errorf("pdftotext output lacks %q", want)
		}
	}
	for _, l := range record.Standard12 {
		if !regexp.MustCompile(`\b` + l + `\b`).MatchString(txt) {
			t.Errorf("lead label %s missing", l)
		}
	}
}

// rasterize renders page `page` of the PDF at dpi with poppler's pdftoppm.
func rasterize(t *testing.T, pdf string, dpi, page int) image.Image {
	t.Helper()
	bin := needTool(t, "pdftoppm")
	prefix := filepath.Join(t.TempDir(), "p")
	p := strconv.Itoa(page)
	cmd := exec.Command(bin, "-png", "-r", strconv.Itoa(dpi), "-f", p, "-l", p, "-singlefile", pdf, prefix)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("pdftoppm: %v\n%s", err, out)
	}
	f, err := os.Open(prefix + ".png")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	return img
}

// TestPagesRasterize renders with a source image: pdftoppm must give two
// pages, page 1 well covered by ink (grid, traces, text) and page 2 showing
// the image.
func TestPagesRasterize(t *testing.T) {
	bin := needTool(t, "pdftoppm")
	s := summaryOf(readPTB(t))
	src := image.NewGray(image.Rect(0, 0, 800, 560))
	for i := range src.Pix {
		src.Pix[i] = 120 // mid grey: page 2 cannot be blank if it is drawn
	}
	s.Source = src
	s.Overlay = []Polyline{{Lead: "II", X: []float64{10, 400, math.NaN(), 500, 790}, Y: []float64{100, 200, 0, 300, 310}}}
	path := renderTo(t, s, "a4")
	dir := t.TempDir()
	if out, err := exec.Command(bin, "-png", "-r", "50", path, filepath.Join(dir, "pg")).CombinedOutput(); err != nil {
		t.Fatalf("pdftoppm: %v\n%s", err, out)
	}
	files, _ := filepath.Glob(filepath.Join(dir, "pg*.png"))
	if len(files) != 2 {
		t.Fatalf("pdftoppm made %d pages, want 2", len(files))
	}
	for i, want := range []float64{0.15, 0.5} {
		f, err := os.Open(files[i])
		if err != nil {
			t.Fatal(err)
		}
		img, err := png.Decode(f)
		f.Close()
		if err != nil {
			t.Fatal(err)
		}
		frac := nonWhite(img)
		t.Logf("page %d: %.1f%% non-white pixels at 50 dpi", i+1, 100*frac)
		if frac < want {
			t.Errorf("page %d: %.3f non-white, want at least %.2f", i+1, frac, want)
		}
	}
}

// nonWhite returns the fraction of pixels with any channel below 245.
func nonWhite(img image.Image) float64 {
	b := img.Bounds()
	n := 0
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bb, _ := img.At(x, y).RGBA()
			if r>>8 < 245 || g>>8 < 245 || bb>>8 < 245 {
				n++
			}
		}
	}
	return float64(n) / float64(b.Dx()*b.Dy())
}

func TestRenderRejects(t *testing.T) {
	rec := readPTB(t)
	for _, tc := range []struct {
		name  string
		s     *Summary
		paper string
	}{
		{"nil", nil, "a4"},
		{"no record", &Summary{Caution: cautionText}, "a4"},
		{"no caution", &Summary{Record: rec}, "a4"},
		{"bad paper", summaryOf(rec), "a5"},
		{"ragged overlay", func() *Summary {
			s := summaryOf(rec)
			s.Source = image.NewGray(image.Rect(0, 0, 4, 4))
			s.Overlay = []Polyline{{X: []float64{1, 2}, Y: []float64{1}}}
			return s
		}(), "a4"},
		{"infinite axis", func() *Summary { s := summaryOf(rec); s.Axes[0].Deg = math.Inf(1); return s }(), "letter"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			err := Render(&buf, tc.s, tc.paper)
			if err == nil || !strings.HasPrefix(err.Error(), "report: ") {
				t.Fatalf("err = %v, want a report: error", err)
			}
			if buf.Len() != 0 {
				t.Errorf("%d bytes written on error", buf.Len())
			}
		})
	}
}

// TestUnusualText puts characters outside the core fonts' code page in the
// header: the page must still render, keep what cp1252 holds (ë, µ, °, ±)
// and mark the rest.
func TestUnusualText(t *testing.T) {
	bin := needTool(t, "pdftotext")
	s := summaryOf(readPTB(t))
	s.Header = []Field{{"Name", "Zoë Ωmega 李"}, {"Note", "tab\there −5 µV"}}
	s.Flags = []string{"a very long flag that goes on and on so that it has to wrap onto a second line in the narrow column; and then some more words that cannot fit"}
	out, err := exec.Command(bin, renderTo(t, s, "a4"), "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	txt := string(out)
	for _, want := range []string{"Zoë ?mega ?", "tab here -5 µV", "a very long flag"} {
		if !strings.Contains(txt, want) {
			t.Errorf("text lacks %q:\n%s", want, txt)
		}
	}
}

// A single-lead strip (lead II of the PTB record s0010_re, its first 10 s)
// is drawn across the row as a strip, with no empty cells and no empty
// axis wheel; poppler's pdftotext reads the page back.
func TestSingleLeadPage(t *testing.T) {
	bin := needTool(t, "pdftotext")
	full := readPTB(t)
	ii := full.Lead("II").Resample(500)
	ii.MV = ii.MV[:5000]
	rec := &record.Record{Name: "strip", Signals: []record.Signal{ii}}
	path := renderTo(t, summaryOf(rec), "a4")
	out, err := exec.Command(bin, "-layout", path, "-").Output()
	if err != nil {
		t.Fatalf("pdftotext: %v", err)
	}
	txt := strings.Join(strings.Fields(string(out)), " ")
	for _, want := range []string{"II 0–10 s", "not measurable from a single lead", "Not a diagnostic device."} {
		if !strings.Contains(txt, want) {
			t.Errorf("pdftotext output lacks %q:\n%s", want, txt)
		}
	}
	if n := strings.Count(txt, "II 0–10 s"); n != 1 {
		t.Errorf("the 10 s strip is drawn %d times", n)
	}
	for _, not := range []string{"not recorded", "aVR -150°", "aVF +90°"} {
		if strings.Contains(txt, not) {
			t.Errorf("the single-lead page shows %q", not)
		}
	}
}
