package samples

import (
	"bytes"
	"embed"
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/jpeg"
	"image/png"
	"math/rand"
	"path"

	"tracelift/record"
	"tracelift/record/csvio"
	"tracelift/samples/dipole"
)

// The demo printouts are made by `go run ./samples/internal/makedemo`
// from invented signals and committed; each image has its truth beside
// it: <stem>.csv (what was drawn per lead, mV on the tracing clock, the
// CLI's CSV layout) and <stem>.json (DemoTruth).
//
//go:embed demo/*.png demo/*.jpg demo/*.csv demo/*.json
var demoFS embed.FS

// DemoFile is one embedded demo printout.
type DemoFile struct {
	Name      string // file name, e.g. "hillcrest_clean_300dpi.png"
	Data      []byte // the image file's bytes
	About     string // one line for a person
	TruthCSV  []byte // drawn signals: time_s,I,II,…,V6 in mV, tracing clock
	TruthJSON []byte // DemoTruth as JSON
}

// DemoTruth is what a demo printout was made from.
type DemoTruth struct {
	Name        string        `json:"name"`
	About       string        `json:"about"`
	Params      dipole.Params `json:"params"`
	Dipole      dipole.Truth  `json:"dipole"`
	Style       Style         `json:"style"`
	Degradation Degradation   `json:"degradation"`
	JPEGQuality int           `json:"jpeg_quality,omitempty"` // of the file itself
	Printout    Truth         `json:"printout"`               // Signals left out: see the CSV
}

// demoSpec is a scenario: an invented signal, a look, a condition.
type demoSpec struct {
	name, about string
	params      dipole.Params
	style       func() Style
	cond        string
	condSeed    int64
	jpegQ       int
}

func demoSpecs() []demoSpec {
	return []demoSpec{
		{
			name:   "hillcrest_clean_300dpi.png",
			about:  "Clean 300-dpi scan, 3x4+1 with a lead II rhythm strip, red grid (invented signal, not a patient)",
			params: dipole.Params{HeartRateBPM: 72, QRSAxisDeg: 55, PAxisDeg: 50, TAxisDeg: 40, NoiseMV: 0.006, WanderMV: 0.04, Seed: 101},
			style: func() Style {
				s := DefaultStyle()
				s.Header = "Hillcrest Rural Health Post · demo tracing · not a patient"
				return s
			},
			cond: "clean",
		},
		{
			name:   "lakeview_phone_photo.jpg",
			about:  "Phone photo of a 3x4+1 printout on a table: slanted, unevenly lit, JPEG (invented signal, not a patient)",
			params: dipole.Params{HeartRateBPM: 96, QRSAxisDeg: -35, PAxisDeg: 45, TAxisDeg: 20, TransitionLead: 4.5, QTms: 340, NoiseMV: 0.008, WanderMV: 0.06, Seed: 202},
			style: func() Style {
				s := DefaultStyle()
				s.Header = "Lakeview Community Clinic (fictional) · synthetic ECG · not a patient"
				s.GridColor = color.NRGBA{245, 150, 160, 255}
				s.TraceWidthMM = 0.35
				s.Font = FontMono
				return s
			},
			cond: "photo", condSeed: 7, jpegQ: 82,
		},
		{
			name:   "station4_fax.png",
			about:  "Fax at 200 x 100 dpi, black and white, 3x4+3 with rhythm strips II, V1, V5 (invented signal, not a patient)",
			params: dipole.Params{HeartRateBPM: 54, QRSAxisDeg: 95, PAxisDeg: 60, TAxisDeg: 70, PRms: 200, TransitionLead: 3, NoiseMV: 0.005, Seed: 303},
			style: func() Style {
				s := DefaultStyle()
				s.Layout = Layout3x4R3
				s.Header = "Station 4 · training fax · invented signal · not a patient"
				s.TraceWidthMM = 0.4
				s.Font = FontDotMatrix
				s.LabelPt = 11
				return s
			},
			cond: "fax", condSeed: 3,
		},
		{
			name:   "northfield_6x2_cabrera_200dpi.jpg",
			about:  "6x2 in Cabrera order, scanned at 200 dpi slightly turned, orange grid, JPEG (invented signal, not a patient)",
			params: dipole.Params{HeartRateBPM: 64, QRSAxisDeg: 20, PAxisDeg: 55, TAxisDeg: 30, TransitionLead: 2.5, QRSms: 100, NoiseMV: 0.006, WanderMV: 0.03, Seed: 404},
			style: func() Style {
				s := DefaultStyle()
				s.Layout = Layout6x2
				s.Cabrera = true
				s.DPI = 200
				s.GridColor = color.NRGBA{240, 150, 60, 255}
				s.Header = "Northfield Teaching Ward (fictional) · simulated 12-lead · Cabrera"
				s.Font = FontBold
				s.LabelPt = 9
				return s
			},
			cond: "rotated", condSeed: 11, jpegQ: 90,
		},
	}
}

// BuildDemo makes one demo printout: the image file's bytes, the truth
// CSV and the truth JSON. It is what makedemo runs; tests use it to
// check the embedded files are current.
func BuildDemo(name string) (img, truthCSV, truthJSON []byte, err error) {
	for _, sp := range demoSpecs() {
		if sp.name != name {
			continue
		}
		rec := dipole.Generate(sp.params)
		st := sp.style()
		p, err := Render(rec, st)
		if err != nil {
			return nil, nil, nil, err
		}
		d := Condition(sp.cond, rand.New(rand.NewSource(sp.condSeed)))
		d.JPEGQuality = 0 // the file itself is the JPEG
		q, err := Degrade(p, d)
		if err != nil {
			return nil, nil, nil, err
		}
		var ib bytes.Buffer
		switch path.Ext(name) {
		case ".jpg":
			err = jpeg.Encode(&ib, opaqueRGBA(q.Image), &jpeg.Options{Quality: sp.jpegQ})
		default:
			enc := png.Encoder{CompressionLevel: png.BestCompression}
			if d.Fax {
				err = enc.Encode(&ib, toBilevel(q.Image))
			} else {
				err = enc.Encode(&ib, q.Image)
			}
		}
		if err != nil {
			return nil, nil, nil, fmt.Errorf("samples: encoding %s: %w", name, err)
		}
		var cb bytes.Buffer
		if err := csvio.Write(&cb, q.Truth.Signals, 0); err != nil {
			return nil, nil, nil, err
		}
		t := q.Truth
		t.Signals = nil
		dt := DemoTruth{Name: name, About: sp.about, Params: sp.params, Dipole: sp.params.Truth(),
			Style: st, Degradation: d, JPEGQuality: sp.jpegQ, Printout: t}
		jb, err := json.MarshalIndent(dt, "", " ")
		if err != nil {
			return nil, nil, nil, err
		}
		return ib.Bytes(), cb.Bytes(), append(jb, '\n'), nil
	}
	return nil, nil, nil, fmt.Errorf("samples: no demo named %q", name)
}

// DemoNames lists the demo printouts in order; the first is the default.
func DemoNames() []string {
	var out []string
	for _, sp := range demoSpecs() {
		out = append(out, sp.name)
	}
	return out
}

// toBilevel turns a black-and-white image into a two-colour paletted
// one, which PNG stores at one bit per pixel.
func toBilevel(m *image.NRGBA) *image.Paletted {
	pal := color.Palette{color.Gray{0}, color.Gray{255}}
	out := image.NewPaletted(m.Rect, pal)
	for y := 0; y < m.Rect.Dy(); y++ {
		for x := 0; x < m.Rect.Dx(); x++ {
			if m.Pix[m.PixOffset(x, y)] >= 128 {
				out.Pix[out.PixOffset(x, y)] = 1
			}
		}
	}
	return out
}

func stem(name string) string { return name[:len(name)-len(path.Ext(name))] }

// Demo returns the embedded demo printouts, the clean scan first.
func Demo() []DemoFile {
	var out []DemoFile
	for _, sp := range demoSpecs() {
		data, err := demoFS.ReadFile("demo/" + sp.name)
		if err != nil {
			continue // not generated yet
		}
		c, _ := demoFS.ReadFile("demo/" + stem(sp.name) + ".csv")
		j, _ := demoFS.ReadFile("demo/" + stem(sp.name) + ".json")
		out = append(out, DemoFile{Name: sp.name, Data: data, About: sp.about, TruthCSV: c, TruthJSON: j})
	}
	return out
}

// DefaultDemo returns the clean 300-dpi demo scan.
func DefaultDemo() DemoFile {
	d := Demo()
	if len(d) == 0 {
		return DemoFile{}
	}
	return d[0]
}

// TruthRecord parses the demo's drawn signals.
func (d DemoFile) TruthRecord() (*record.Record, error) {
	if len(d.TruthCSV) == 0 {
		return nil, errors.New("samples: demo has no truth signals")
	}
	rec, err := csvio.Read(bytes.NewReader(d.TruthCSV))
	if err != nil {
		return nil, fmt.Errorf("samples: demo truth %s: %w", d.Name, err)
	}
	return rec, nil
}

// Truth parses the demo's truth description.
func (d DemoFile) Truth() (DemoTruth, error) {
	var t DemoTruth
	if err := json.Unmarshal(d.TruthJSON, &t); err != nil {
		return t, fmt.Errorf("samples: demo truth %s: %w", d.Name, err)
	}
	return t, nil
}
