package report

import (
	"bytes"
	"image"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"tracelift/calib"
	"tracelift/digitize"
	"tracelift/pipeline"
)

// TestWriteOutcome hands the pipeline's PDF writer an outcome around the
// PTB record (as if it had been traced from a page) and reads the result
// back with poppler: two pages, the user's header value, the calibration
// facts, the lead-law note and the caution on the page.
func TestWriteOutcome(t *testing.T) {
	bin := needTool(t, "pdftotext")
	rec := readPTB(t)
	img := image.NewGray(image.Rect(0, 0, 1200, 800))
	for i := range img.Pix {
		img.Pix[i] = 230
	}
	ys := make([]float64, 600)
	for i := range ys {
		ys[i] = 400 + 50*math.Sin(float64(i)/20)
	}
	o := &pipeline.Outcome{
		Page: &calib.Page{Image: img, Path: "/somewhere/scan-17.png", SHA256: strings.Repeat("ab", 32), PageCount: 1},
		Calib: &calib.Result{PxPerMMX: 11.81, PxPerMMY: 11.79, GainMMPerMV: 10, SpeedMMPerS: 25,
			Source: "grid", Confidence: 0.9, RectToImage: [9]float64{1, 0, 0, 0, 1, 0, 0, 0, 1}},
		Digitized: &digitize.Result{
			Record: rec, Layout: "3x4+1",
			Traces:  []digitize.Trace{{Lead: "II", X0: 100, Y: ys}},
			Quality: map[string]digitize.LeadQuality{"I": {Confidence: 0.91}, "II": {Confidence: 0.42}},
			Laws:    []digitize.LawCheck{{T0S: 0, T1S: 2.5, EinthovenRMSuV: 12, GoldbergerRMSuV: [3]float64{8, -1, 9}, Worst: "III"}},
		},
		Verdict: pipeline.Verdict{Level: pipeline.NotReadable, Reasons: []pipeline.Reason{
			{Code: "layout_misfit", Level: pipeline.NotReadable, Text: "the limb leads break the laws", Do: "give the layout by hand"}}},
	}
	var buf bytes.Buffer
	opt := pipeline.ExportOptions{Paper: "letter", Header: map[string]string{"Name": "Test Person", "ward": "7B"}}
	if err := Write(&buf, o, opt); err != nil {
		t.Fatalf("Write: %v", err)
	}
	path := filepath.Join(t.TempDir(), "o.pdf")
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	if info := pdfInfo(t, path); info["Pages"] != "2" || !strings.HasPrefix(info["Page size"], "792 x 612") {
		t.Errorf("pdfinfo: %s pages, size %q; want 2 pages of US Letter landscape", info["Pages"], info["Page size"])
	}
	out, err := exec.Command(bin, path, "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	txt := strings.Join(strings.Fields(string(out)), " ")
	for _, want := range []string{
		"Test Person", "WARD", "7B", "scan-17.png", "sha256 abababababab", "11.81 × 11.79 px/mm from the grid",
		"II = I + III off by 12 µV", "aVR 8 µV", "42%", "Source image with the traced leads",
		"Not to be read", "the limb leads break the laws (give the layout by hand)",
		pipeline.Caution,
	} {
		if !strings.Contains(txt, want) {
			t.Errorf("page text lacks %q\n%s", want, txt)
		}
	}
	if strings.Count(txt, pipeline.Caution) != 2 {
		t.Errorf("caution printed %d times, want once per page", strings.Count(txt, pipeline.Caution))
	}
	// Nothing digitized: a clear error, nothing written.
	buf.Reset()
	if err := Write(&buf, &pipeline.Outcome{}, opt); err == nil || buf.Len() != 0 {
		t.Errorf("empty outcome: err %v, %d bytes", err, buf.Len())
	}
}

func TestHeaderFields(t *testing.T) {
	got := headerFields(map[string]string{"ID": " 42 ", "name": "A", "zz": "last", "aa": "first", "b": "x", "c": "y"})
	want := []Field{{"Name", "A"}, {"Identifier", "42"}, {"Date of birth", ""}, {"Recorded", ""}, {"Reviewed by", ""}, {"aa", "first"}}
	if len(got) != len(want) {
		t.Fatalf("got %v", got)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("field %d = %v, want %v", i, got[i], want[i])
		}
	}
}

func TestOverlayHomography(t *testing.T) {
	// A pure scale by 2 and shift by (10, 20): rectified column 5, centre
	// y 3.5 (pixel centres at +0.5) is calib's (5, 3), image (20, 26),
	// image-edge coordinates (20.5, 26.5).
	h := [9]float64{2, 0, 10, 0, 2, 20, 0, 0, 1}
	p := overlay([]digitize.Trace{{Lead: "V1", X0: 5, Y: []float64{3.5, math.NaN()}}}, h)
	if len(p) != 1 || p[0].X[0] != 20.5 || p[0].Y[0] != 26.5 || !math.IsNaN(p[0].X[1]) {
		t.Errorf("overlay = %+v", p)
	}
}
