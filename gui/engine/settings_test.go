package engine

import (
	"context"
	"errors"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tracelift/calib"
	"tracelift/gui/model"
)

// A gain typed by hand wins over the demo's 10 mm/mV pulses: at 5 mm/mV
// every amplitude is twice what it is at 10 (mV = mm / gain, the
// definition of the gain in mm/mV: common practice), and the analysis
// says 5.
func TestTypedGainHonoured(t *testing.T) {
	if testing.Short() {
		t.Skip("reads a 300-dpi page twice")
	}
	src, _ := Demo()
	b := &Backend{}
	a10, err := b.Analyze(context.Background(), src, model.Settings{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	a5, err := b.Analyze(context.Background(), src, model.Settings{GainMMPerMV: 5}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if a10.GainMMPerMV != 10 || a5.GainMMPerMV != 5 {
		t.Fatalf("gains %v and %v, want 10 and 5", a10.GainMMPerMV, a5.GainMMPerMV)
	}
	s10, s5 := a10.Raw.Lead("II"), a5.Raw.Lead("II")
	if s10 == nil || s5 == nil || s10.Len() != s5.Len() {
		t.Fatal("lead II missing or of another length")
	}
	n := 0
	for k := range s10.MV {
		if math.IsNaN(s10.MV[k]) {
			continue
		}
		n++
		if math.Abs(s5.MV[k]-2*s10.MV[k]) > 1e-9 {
			t.Fatalf("sample %d: %v at 5 mm/mV, %v at 10", k, s5.MV[k], s10.MV[k])
		}
	}
	if n < 1000 {
		t.Fatalf("only %d samples", n)
	}
	said := false
	for _, w := range a5.Warnings {
		said = said || strings.Contains(w, "given by hand")
		if strings.Contains(w, "the pulse is used") {
			t.Errorf("warning %q contradicts the typed gain", w)
		}
	}
	if !said {
		t.Errorf("no warning says the typed gain is used: %q", a5.Warnings)
	}
}

// Quarter turns are clockwise and mirroring flips left to right: the
// top-left pixel of a 3×2 picture goes to the top right after one turn,
// to the bottom left after three, and to the top right after a mirror.
func TestOrient(t *testing.T) {
	img := image.NewNRGBA(image.Rect(0, 0, 3, 2))
	img.Set(0, 0, color.NRGBA{255, 0, 0, 255})
	red := func(m image.Image, x, y int) bool { r, _, _, _ := m.At(x, y).RGBA(); return r > 0xf000 }
	cases := []struct {
		q      int
		mirror bool
		w, h   int
		x, y   int
	}{{1, false, 2, 3, 1, 0}, {2, false, 3, 2, 2, 1}, {3, false, 2, 3, 0, 2}, {-1, false, 2, 3, 0, 2}, {0, true, 3, 2, 2, 0}}
	for _, c := range cases {
		o := Orient(img, c.q, c.mirror)
		if b := o.Bounds(); b.Dx() != c.w || b.Dy() != c.h || !red(o, c.x, c.y) {
			t.Errorf("turns %d mirror %v: %v, red at (%d,%d) %v", c.q, c.mirror, o.Bounds(), c.x, c.y, red(o, c.x, c.y))
		}
	}
	if Orient(img, 4, false) != image.Image(img) {
		t.Error("four turns are no turn")
	}
}

// Errors in the user's words: a file that is no picture and a picture
// that is no ECG (an invented plain drawing) are read through the real
// pipeline; the messages carry no package names, say nothing twice, and
// the advice fits (no "sharper scan" for a picture that is no ECG).
func TestExplainInUsersWords(t *testing.T) {
	if testing.Short() {
		t.Skip("reads pictures")
	}
	dir := t.TempDir()
	notImage := filepath.Join(dir, "notes.png")
	os.WriteFile(notImage, []byte("shopping list: milk, bread"), 0o644)
	drawing := filepath.Join(dir, "drawing.png")
	img := image.NewNRGBA(image.Rect(0, 0, 1200, 900))
	for i := range img.Pix {
		img.Pix[i] = 0xff
	}
	for y := 300; y < 600; y++ { // a dark square: no grid, no trace
		for x := 400; x < 800; x++ {
			img.Set(x, y, color.NRGBA{40, 40, 40, 255})
		}
	}
	f, _ := os.Create(drawing)
	png.Encode(f, img)
	f.Close()

	b := &Backend{}
	for _, c := range []struct {
		path    string
		want    error
		advice  string
		notSaid string
		retry   bool // reading again with a scale or a turn may help
	}{
		{notImage, calib.ErrFormat, "PNG, JPEG, TIFF or PDF", "sharper", false},
		{drawing, nil, "", "sharper scan", true},
	} {
		_, err := b.Analyze(context.Background(), model.Source{Path: c.path, Name: filepath.Base(c.path)}, model.Settings{}, nil)
		if err == nil {
			t.Fatalf("%s read without error", c.path)
		}
		if c.want != nil && !errors.Is(err, c.want) {
			t.Fatalf("%s: %v", c.path, err)
		}
		ex := Explain(err)
		msg := ex.String()
		if ex.Retry != c.retry {
			t.Errorf("%s: retry offered %v", c.path, ex.Retry)
		}
		t.Logf("%s: %v\n-> %s", filepath.Base(c.path), err, msg)
		for _, pkg := range []string{"calib:", "digitize:", "pipeline:", "engine:"} {
			if strings.Contains(msg, pkg) {
				t.Errorf("%s: message names the package %s: %q", c.path, pkg, msg)
			}
		}
		if !strings.Contains(msg, c.advice) || strings.Contains(msg, c.notSaid) {
			t.Errorf("%s: advice does not fit: %q", c.path, msg)
		}
		if n := strings.Count(msg, filepath.Base(c.path)); n != 1 {
			t.Errorf("%s: names the file %d times: %q", c.path, n, msg)
		}
		if strings.Count(strings.ToLower(msg), "unsupported or damaged") > 1 {
			t.Errorf("%s: says it twice: %q", c.path, msg)
		}
	}
}
