package samples

import (
	"bytes"
	"image"
	_ "image/jpeg"
	_ "image/png"
	"math"
	"strings"
	"testing"

	"tracelift/record"
)

func TestDemoFiles(t *testing.T) {
	t.Parallel()
	demos := Demo()
	if len(demos) != len(DemoNames()) || len(demos) < 3 {
		t.Fatalf("%d demo files embedded, want %d (run go run ./samples/internal/makedemo)", len(demos), len(DemoNames()))
	}
	if d := DefaultDemo(); d.Name != "hillcrest_clean_300dpi.png" {
		t.Errorf("default demo is %q", d.Name)
	}
	for _, d := range demos {
		if len(d.Data) > 2<<20 {
			t.Errorf("%s is %d bytes, over 2 MiB", d.Name, len(d.Data))
		}
		if !strings.Contains(d.About, "not a patient") {
			t.Errorf("%s: About does not say it is not a patient", d.Name)
		}
		m, _, err := image.Decode(bytes.NewReader(d.Data))
		if err != nil {
			t.Fatalf("%s: %v", d.Name, err)
		}
		tr, err := d.Truth()
		if err != nil {
			t.Fatal(err)
		}
		rec, err := d.TruthRecord()
		if err != nil {
			t.Fatal(err)
		}
		for _, l := range record.Standard12 {
			if rec.Lead(l) == nil {
				t.Errorf("%s: truth CSV lacks %s", d.Name, l)
			}
		}
		// The image's size follows from the paper and the truth's scale
		// (for a clean render, exactly; the fax at 200 x 100 dpi).
		b := m.Bounds()
		switch tr.Degradation.Name {
		case "clean":
			if b.Dx() != int(math.Round(tr.Style.PaperWMM*tr.Printout.PxPerMMX)) || b.Dy() != int(math.Round(tr.Style.PaperHMM*tr.Printout.PxPerMMY)) {
				t.Errorf("%s: %v px for %v x %v mm at %v px/mm", d.Name, b, tr.Style.PaperWMM, tr.Style.PaperHMM, tr.Printout.PxPerMMX)
			}
		case "fax":
			// Slightly turned before faxing: the paper axes' scales mix a
			// little (under 0.5 % at ±1.5°).
			if math.Abs(tr.Printout.PxPerMMX/(200/25.4)-1) > 0.005 || math.Abs(tr.Printout.PxPerMMY/(100/25.4)-1) > 0.005 {
				t.Errorf("%s: fax scale %v x %v", d.Name, tr.Printout.PxPerMMX, tr.Printout.PxPerMMY)
			}
		}
		if len(tr.Printout.Panels) < 12 || len(tr.Dipole.RPeaksS) < 5 {
			t.Errorf("%s: truth has %d panels, %d beats", d.Name, len(tr.Printout.Panels), len(tr.Dipole.RPeaksS))
		}
	}
}

// The embedded demos are what the generator makes now: truth CSVs equal
// and the images' pixels (nearly) equal. When this fails after a change
// to the renderer, run go run ./samples/internal/makedemo.
func TestDemoCurrent(t *testing.T) {
	t.Parallel()
	names := DemoNames()
	if testing.Short() {
		names = names[:1]
	}
	embedded := map[string]DemoFile{}
	for _, d := range Demo() {
		embedded[d.Name] = d
	}
	for _, name := range names {
		img, c, _, err := BuildDemo(name)
		if err != nil {
			t.Fatal(err)
		}
		d := embedded[name]
		if !bytes.Equal(c, d.TruthCSV) {
			t.Errorf("%s: truth CSV differs from the generator's; regenerate the demo", name)
		}
		a, _, err1 := image.Decode(bytes.NewReader(img))
		e, _, err2 := image.Decode(bytes.NewReader(d.Data))
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: %v %v", name, err1, err2)
		}
		if a.Bounds() != e.Bounds() {
			t.Fatalf("%s: generator gives %v, embedded is %v", name, a.Bounds(), e.Bounds())
		}
		var diff, n int
		b := a.Bounds()
		for y := b.Min.Y; y < b.Max.Y; y += 3 {
			for x := b.Min.X; x < b.Max.X; x += 3 {
				r1, g1, b1, _ := a.At(x, y).RGBA()
				r2, g2, b2, _ := e.At(x, y).RGBA()
				n++
				if absDiff(r1, r2) > 8<<8 || absDiff(g1, g2) > 8<<8 || absDiff(b1, b2) > 8<<8 {
					diff++
				}
			}
		}
		if float64(diff) > 0.001*float64(n) {
			t.Errorf("%s: %d of %d sampled pixels differ from the generator's; regenerate the demo", name, diff, n)
		}
	}
}

func absDiff(a, b uint32) uint32 {
	if a > b {
		return a - b
	}
	return b - a
}

func TestBuildDemoUnknown(t *testing.T) {
	t.Parallel()
	if _, _, _, err := BuildDemo("nope.png"); err == nil {
		t.Error("no error for an unknown demo")
	}
}
