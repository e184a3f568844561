package samples

import (
	"bytes"
	"image"
	"image/jpeg"
	"image/png"
	"math"
	"math/rand"

	"tracelift/record"
	"tracelift/samples/dipole"
)

// SuiteCase is one printout of the seeded accuracy suite that
// `tracelift-cli bench` scores: the signals drawn, how they are drawn and
// what is done to the picture. The same (seed, index) always gives the
// same case, so a case the bench scores badly can be rebuilt elsewhere.
type SuiteCase struct {
	Index       int
	Condition   string
	Source      string // "dipole" or the real record's name
	Record      *record.Record
	Dipole      *dipole.Truth // nil for a real record
	Style       Style
	Degradation Degradation
}

// NewSuiteCase draws case i of the suite for seed, cycling through conds.
// Every fourth case draws 10 s of real, when it is not nil; the others
// draw a dipole record with rate, axes, intervals and transition spread
// over the usual adult range.
func NewSuiteCase(seed int64, i int, conds []string, real *record.Record) SuiteCase {
	rng := rand.New(rand.NewSource(seed*1000003 + int64(i)))
	c := SuiteCase{Index: i, Condition: conds[i%len(conds)], Source: "dipole"}
	if real != nil && i%4 == 3 {
		c.Source = real.Name
		c.Record = real.Window(record.Standard12, 500, rng.Float64()*25, 10)
	} else {
		p := dipole.Params{
			HeartRateBPM:   50 + rng.Float64()*60,
			QRSAxisDeg:     -90 + rng.Float64()*270,
			PAxisDeg:       20 + rng.Float64()*50,
			TAxisDeg:       10 + rng.Float64()*60,
			QRSms:          75 + rng.Float64()*40,
			PRms:           130 + rng.Float64()*70,
			TransitionLead: 2 + rng.Float64()*3,
			QRSAmpMV:       1 + rng.Float64()*1.2,
			NoiseMV:        0.005,
			Seed:           rng.Int63(),
		}
		rr := 60 / p.HeartRateBPM
		p.QTms = 410 * math.Sqrt(rr) * (0.9 + rng.Float64()*0.2) // Bazett-shaped QT around QTc 410 ms
		c.Record = dipole.Generate(p)
		t := p.Truth()
		c.Dipole = &t
	}
	c.Style = RandomStyle(rng)
	c.Degradation = Condition(c.Condition, rng)
	// The wider looks from a source of their own, so that the record,
	// the classic style's draws and the degradation stay as they were.
	wide := rand.New(rand.NewSource((seed*1000003+int64(i))*7919 + 104729))
	c.Style = ConditionStyle(c.Condition, WidenStyle(c.Style, wide), wide)
	return c
}

// Printout renders and degrades the case.
func (c SuiteCase) Printout() (*Printout, error) {
	_, po, err := c.Printouts()
	return po, err
}

// Printouts renders the case and degrades it, and returns both: the
// clean render is the grid the truth's Panels, Pulses and PageToImage
// are given on (see Unwarp).
func (c SuiteCase) Printouts() (clean, degraded *Printout, err error) {
	clean, err = Render(c.Record, c.Style)
	if err != nil {
		return nil, nil, err
	}
	degraded, err = Degrade(clean, c.Degradation)
	if err != nil {
		return nil, nil, err
	}
	return clean, degraded, nil
}

// File encodes the case's printout as a file would arrive: a JPEG
// (quality 90) for a phone photo, the app's own JPEG for a chat-app
// photo, a TIFF carrying its resolution for a fax that asks for one
// (pages cover sheet, ECG when there is a cover), a PNG otherwise. It
// returns the file's name (case.jpg, case.tif or case.png) and bytes.
func (c SuiteCase) File(po *Printout) (string, []byte, error) {
	var buf bytes.Buffer
	if po.Encoded != nil {
		return "case.jpg", po.Encoded, nil
	}
	if c.Degradation.FileTIFF {
		pages := []*image.NRGBA{po.Image}
		if po.Cover != nil {
			pages = []*image.NRGBA{po.Cover, po.Image}
		}
		tp := make([]TIFFPage, len(pages))
		for i, pg := range pages {
			tp[i] = TIFFPage{Image: pg, DPIX: po.Truth.FileDPIX, DPIY: po.Truth.FileDPIY, Bilevel: true}
		}
		b, err := WriteTIFF(tp)
		return "case.tif", b, err
	}
	switch c.Condition {
	case "photo", "curled", "shadow", "darktable":
		err := jpeg.Encode(&buf, po.Image, &jpeg.Options{Quality: 90})
		return "case.jpg", buf.Bytes(), err
	}
	err := (&png.Encoder{CompressionLevel: png.BestSpeed}).Encode(&buf, po.Image)
	return "case.png", buf.Bytes(), err
}
