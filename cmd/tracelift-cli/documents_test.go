package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"tracelift/samples"
)

// ptbImage renders 10 s of the open PTB record s0010_re (../shared/data,
// see its README) as a 3x4+1 printout at dpi.
func ptbImage(t *testing.T, dpi float64) *samples.Printout {
	t.Helper()
	st := samples.DefaultStyle()
	st.DPI = dpi
	p, err := samples.RenderRecordFile("../../../shared/data/ptb-s0010_re/s0010_re.hea", 2, 10, st)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

type sourceDoc struct {
	Calibration struct {
		X float64 `json:"px_per_mm_x"`
		Y float64 `json:"px_per_mm_y"`
	} `json:"calibration"`
	Source struct {
		Page, Pages int
		Choice      *struct {
			Page    int
			How     string
			Skipped []struct {
				Page int
				Why  string
			}
		} `json:"page_choice"`
		Resolution *struct {
			X, Y     float64
			Unit     string
			StretchY float64 `json:"stretch_y"`
		} `json:"resolution"`
		Check string `json:"resolution_check"`
	} `json:"source"`
}

func readSource(t *testing.T, p string) sourceDoc {
	t.Helper()
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	var d sourceDoc
	if err := json.Unmarshal(b, &d); err != nil {
		t.Fatal(err)
	}
	return d
}

// A fax of a cover sheet, the ECG and another cover sheet: digitize reads
// page 2 and says so; batch writes the ECG page as <stem>-p2 and passes
// over the cover sheets with a word, and a second run finds it done.
func TestDocumentPages(t *testing.T) {
	p := ptbImage(t, 200)
	data, err := samples.WriteTIFF([]samples.TIFFPage{
		{Image: samples.CoverSheet(210, 297, 200, 1), DPIX: 200, DPIY: 200, Bilevel: true},
		{Image: p.Image, DPIX: 200, DPIY: 200},
		{Image: samples.CoverSheet(210, 297, 200, 2), DPIX: 200, DPIY: 200, Bilevel: true},
	})
	if err != nil {
		t.Fatal(err)
	}
	src := t.TempDir()
	fax := filepath.Join(src, "fax.tif")
	if err := os.WriteFile(fax, data, 0o644); err != nil {
		t.Fatal(err)
	}

	out := t.TempDir()
	code, stdout, stderr := cli(t, 2*time.Minute, "digitize", fax, "-o", out)
	if code != 0 {
		t.Fatalf("digitize: exit %d\n%s", code, stderr)
	}
	if !strings.Contains(stdout, "page       2 of 3 (the first page that holds an ECG); page 1 passed over") {
		t.Errorf("the summary does not say which page was read:\n%s", stdout)
	}
	d := readSource(t, filepath.Join(out, "fax.json"))
	if d.Source.Page != 2 || d.Source.Pages != 3 || d.Source.Choice == nil || len(d.Source.Choice.Skipped) != 1 {
		t.Errorf("JSON source %+v, want page 2 of 3 with page 1 passed over", d.Source)
	}
	// --page still chooses.
	out2 := t.TempDir()
	if code, _, stderr := cli(t, 2*time.Minute, "digitize", fax, "--page", "2", "-o", out2); code != 0 {
		t.Fatalf("digitize --page 2: exit %d\n%s", code, stderr)
	} else if d := readSource(t, filepath.Join(out2, "fax.json")); d.Source.Choice == nil || d.Source.Choice.How != "chosen by hand" {
		t.Errorf("--page 2: choice %+v", d.Source.Choice)
	}

	bout := t.TempDir()
	code, stdout, stderr = cli(t, 3*time.Minute, "batch", src, "-o", bout, "--jobs", "1", "--quiet")
	if code != 0 {
		t.Fatalf("batch: exit %d\n%s\n%s", code, stdout, stderr)
	}
	for _, n := range []string{"fax-p2.csv", "fax-p2.json"} {
		if _, err := os.Stat(filepath.Join(bout, n)); err != nil {
			t.Errorf("batch wrote no %s: %v", n, err)
		}
	}
	for _, n := range []string{"fax.json", "fax-p3.json"} {
		if _, err := os.Stat(filepath.Join(bout, n)); err == nil {
			t.Errorf("batch wrote %s for a cover sheet", n)
		}
	}
	if !strings.Contains(stdout, "passed over fax.tif#p1") || !strings.Contains(stdout, "passed over fax.tif#p3") {
		t.Errorf("batch does not say the cover sheets were passed over:\n%s", stdout)
	}
	if d := readSource(t, filepath.Join(bout, "fax-p2.json")); d.Source.Page != 2 {
		t.Errorf("fax-p2.json is of page %d", d.Source.Page)
	}
	code, stdout, _ = cli(t, 3*time.Minute, "batch", src, "-o", bout, "--jobs", "1", "--quiet")
	if code != 0 || !strings.Contains(stdout, "1 up to date") {
		t.Errorf("second batch: exit %d, want the ECG page up to date:\n%s", code, stdout)
	}
}

// A one-page fax at 204 × 98 dpi: the JSON says what the file stated and
// how the rows were stretched, and the scale found is the renderer's
// (204 dpi on both axes after the stretch) within 3 %.
func TestFaxResolutionFromFile(t *testing.T) {
	p := ptbImage(t, 204)
	data, err := samples.WriteTIFF([]samples.TIFFPage{{Image: samples.FaxRows(p.Image, 98.0/204), DPIX: 204, DPIY: 98, Bilevel: true}})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	in := filepath.Join(dir, "fax204.tif")
	if err := os.WriteFile(in, data, 0o644); err != nil {
		t.Fatal(err)
	}
	out := t.TempDir()
	code, stdout, stderr := cli(t, 2*time.Minute, "digitize", in, "-o", out)
	if code != 0 {
		t.Fatalf("digitize: exit %d\n%s", code, stderr)
	}
	if !strings.Contains(stdout, "204 × 98 per inch: rows stretched") {
		t.Errorf("the summary does not say the rows were stretched:\n%s", stdout)
	}
	d := readSource(t, filepath.Join(out, "fax204.json"))
	r := d.Source.Resolution
	if r == nil || r.X != 204 || r.Y != 98 || r.Unit != "inch" || math.Abs(r.StretchY-204.0/98) > 0.01 {
		t.Fatalf("JSON resolution %+v, want 204 × 98 per inch, rows stretched ×%.3f", r, 204.0/98)
	}
	want := p.Truth.PxPerMMX
	if math.Abs(d.Calibration.X/want-1) > 0.03 || math.Abs(d.Calibration.Y/want-1) > 0.03 {
		t.Errorf("scale %.3f × %.3f px/mm, want %.3f within 3 %%", d.Calibration.X, d.Calibration.Y, want)
	}
}
