package pipeline

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/png"
	"math"
	"math/rand"
	"os"
	"path/filepath"
	"strings"
	"testing"

	xfont "golang.org/x/image/font"
	"golang.org/x/image/font/gofont/gobold"
	"golang.org/x/image/font/gofont/gomono"
	"golang.org/x/image/font/gofont/goregular"
	"golang.org/x/image/font/opentype"
	"golang.org/x/image/math/fixed"

	"tracelift/calib"
	"tracelift/samples"
)

// plasma draws plasma noise: forty plane waves of random direction, with
// amplitude falling as frequency rises (a 1/f texture), in colour.
func plasma(seed int64) *image.NRGBA {
	rng := rand.New(rand.NewSource(seed))
	const w, h = 1600, 1200
	m := image.NewNRGBA(image.Rect(0, 0, w, h))
	type wave struct{ fx, fy, ph, a float64 }
	var ws []wave
	for i := 0; i < 40; i++ {
		f := math.Pow(2, rng.Float64()*6) / 800
		ang := rng.Float64() * 2 * math.Pi
		ws = append(ws, wave{f * math.Cos(ang), f * math.Sin(ang), rng.Float64() * 2 * math.Pi, 1 / (f * 800)})
	}
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			v := 0.0
			for _, q := range ws {
				v += q.a * math.Sin(2*math.Pi*(q.fx*float64(x)+q.fy*float64(y))+q.ph)
			}
			c := uint8(math.Max(0, math.Min(255, 128+10*v)))
			m.SetNRGBA(x, y, color.NRGBA{c, 255 - c, c/2 + 60, 255})
		}
	}
	return m
}

func detect(t *testing.T, data []byte, name string) (*calib.Result, error) {
	t.Helper()
	pg, err := calib.Decode(data, name, calib.LoadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	return calib.Detect(context.Background(), pg, calib.Options{})
}

// Pictures with no ECG fail as "no ECG found" (calib.ErrNotECG, whose
// advice says to check the file), before any tracing.
func TestNoECGRefused(t *testing.T) {
	if testing.Short() {
		t.Skip("detects several pages")
	}
	for seed := int64(1); seed <= 3; seed++ {
		var buf bytes.Buffer
		png.Encode(&buf, plasma(seed))
		pg, err := calib.Decode(buf.Bytes(), "plasma.png", calib.LoadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		o, err := ProcessPage(context.Background(), pg, Options{})
		if !errors.Is(err, calib.ErrNotECG) {
			var brief string
			if o != nil && o.Calib != nil {
				brief = o.Brief()
			}
			t.Errorf("plasma %d: %v, want a wrapped calib.ErrNotECG\n%s", seed, err, brief)
		}
	}
}

// The pages tracelift reads today are not refused: the embedded demo
// printouts and the outside printouts that digitize
// (../../shared/data/outside-printouts, see its README).
func TestECGPagesNotRefused(t *testing.T) {
	if testing.Short() {
		t.Skip("detects several pages")
	}
	type page struct {
		name string
		data []byte
	}
	var pages []page
	for _, d := range samples.Demo() {
		pages = append(pages, page{d.Name, d.Data})
	}
	for _, n := range []string{"outside01.png", "outside02.png", "outside05.png", "outside06.jpg"} {
		b, err := os.ReadFile("../../shared/data/outside-printouts/" + n)
		if err != nil {
			t.Fatal(err)
		}
		pages = append(pages, page{n, b})
	}
	for _, p := range pages {
		cal, err := detect(t, p.data, p.name)
		if err != nil {
			t.Errorf("%s: calib: %v", p.name, err)
			continue
		}
		if err := checkLooksLikeECG(cal, Options{}); err != nil {
			t.Errorf("%s refused: %v (source %s, confidence %.2f, rotation %.1f°)", p.name, err, cal.Source, cal.Confidence, cal.RotationDeg)
		}
	}
}

// textPage draws lines of printed prose on a white A4 sheet at 300 dpi in
// one of Go's own faces (golang.org/x/image/font/gofont) at size pt.
func textPage(t *testing.T, face []byte, pt float64, ruled bool) []byte {
	t.Helper()
	f, err := opentype.Parse(face)
	if err != nil {
		t.Fatal(err)
	}
	fc, err := opentype.NewFace(f, &opentype.FaceOptions{Size: pt, DPI: 300, Hinting: xfont.HintingNone})
	if err != nil {
		t.Fatal(err)
	}
	defer fc.Close()
	const w, h = 2480, 3508
	m := image.NewGray(image.Rect(0, 0, w, h))
	draw.Draw(m, m.Bounds(), image.White, image.Point{}, draw.Src)
	d := &xfont.Drawer{Dst: m, Src: image.Black, Face: fc}
	lh := int(pt * 300 / 72 * 1.4)
	for i, y := 0, 250; y < h-250; i, y = i+1, y+lh {
		d.Dot = fixed.P(180, y)
		d.DrawString(fmt.Sprintf("%d. The rota for the second week lists the night shifts, the stock of gauze, gloves and paper rolls.", i+1))
		if ruled {
			for x := 180; x < w-180; x++ {
				m.SetGray(x, y+lh/3, color.Gray{0})
			}
		}
	}
	var buf bytes.Buffer
	if err := png.Encode(&buf, m); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// A page of printed text has rows of ink but no grid, no pulse and no
// trace: it fails as "no ECG found" (it used to be read as a 12x1 page
// with a rate of 177 bpm and a QTc of 777 ms, exit 0).
func TestTextPageRefused(t *testing.T) {
	if testing.Short() {
		t.Skip("reads several pages")
	}
	for _, c := range []struct {
		name  string
		face  []byte
		pt    float64
		ruled bool
	}{
		{"sans 11 pt", goregular.TTF, 11, false},
		{"sans 7 pt", goregular.TTF, 7, false},
		{"bold 16 pt", gobold.TTF, 16, false},
		{"mono 10 pt", gomono.TTF, 10, false},
		{"sans 12 pt on ruled lines", goregular.TTF, 12, true},
	} {
		pg, err := calib.Decode(textPage(t, c.face, c.pt, c.ruled), "letter.png", calib.LoadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		o, err := ProcessPage(context.Background(), pg, Options{})
		if !errors.Is(err, calib.ErrNotECG) {
			var brief string
			if o != nil && o.Calib != nil && o.Digitized != nil {
				brief = o.Brief()
			}
			t.Errorf("%s: %v, want a wrapped calib.ErrNotECG\n%s", c.name, err, brief)
		}
	}
}

// The pictures kept in testdata/not-ecg (see its README) are refused:
// "no ECG found", or "no scale" where nothing on the page gives one, and
// never read.
func TestNotECGCorpus(t *testing.T) {
	if testing.Short() {
		t.Skip("reads several pages")
	}
	files, err := filepath.Glob("testdata/not-ecg/*.*")
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, f := range files {
		if strings.HasSuffix(f, ".md") {
			continue
		}
		n++
		o, err := Process(context.Background(), f, Options{})
		if errors.Is(err, calib.ErrNotECG) || errors.Is(err, calib.ErrNoScale) {
			continue
		}
		var brief string
		if err == nil && o != nil {
			brief = o.Brief()
		}
		t.Errorf("%s: %v, want no ECG found\n%s", f, err, brief)
	}
	if n < 6 {
		t.Errorf("only %d pictures in testdata/not-ecg", n)
	}
}
