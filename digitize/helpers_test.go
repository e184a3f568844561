package digitize

import (
	"context"
	"image"
	"math"
	"testing"

	"tracelift/calib"
	"tracelift/record"
	"tracelift/samples"
	"tracelift/samples/dipole"
	"tracelift/stats"
)

// truthCal builds the calibration result from a render's truth, as
// calib.Detect would for a clean page: the scale, gain and speed the
// renderer used, and our own ink map of the picture.
func truthCal(p *samples.Printout) *calib.Result {
	c := &calib.Result{
		Rectified:   p.Image,
		PxPerMM:     p.Truth.PxPerMMX,
		PxPerMMX:    p.Truth.PxPerMMX,
		PxPerMMY:    p.Truth.PxPerMMY,
		GainMMPerMV: p.Truth.GainMMPerMV,
		SpeedMMPerS: p.Truth.SpeedMMPerS,
		Source:      "truth",
		Confidence:  1,
	}
	c.Ink = calib.InkOf(p.Image, c.PxPerMM)
	for _, b := range p.Truth.Pulses {
		c.Pulses = append(c.Pulses, calib.Pulse{Box: b, HeightMM: (b[3] - b[1]) / c.PxPerMM, WidthMM: (b[2] - b[0]) / c.PxPerMM})
	}
	return c
}

// detect calibrates a picture as a page is read in use (calib.Detect),
// failing the test when it cannot.
func detect(t testing.TB, img *image.NRGBA) *calib.Result {
	t.Helper()
	cal, err := calib.Detect(context.Background(), &calib.Page{Image: img}, calib.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return cal
}

func render(t testing.TB, rec *record.Record, st samples.Style) *samples.Printout {
	t.Helper()
	p, err := samples.Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// scoreLeads compares every truth lead with the digitized one over the
// truth lead's window and returns the SNR per lead (−Inf when missing).
func scoreLeads(truth, est *record.Record) map[string]record.Accuracy {
	out := map[string]record.Accuracy{}
	for i := range truth.Signals {
		ref := &truth.Signals[i]
		e := est.Lead(ref.Lead)
		if e == nil {
			out[ref.Lead] = record.Accuracy{Lead: ref.Lead, SNRdB: math.Inf(-1)}
			continue
		}
		out[ref.Lead] = record.Compare(ref, e, ref.StartS, ref.EndS())
	}
	return out
}

func medianSNR(acc map[string]record.Accuracy) float64 {
	var v []float64
	for _, a := range acc {
		v = append(v, a.SNRdB)
	}
	if len(v) == 0 {
		return math.Inf(-1) // no lead scored fails every SNR target
	}
	return stats.Median(v)
}

func dipoleRecord(seed int64) *record.Record {
	return dipole.Generate(dipole.Params{Seed: seed, DurationS: 10})
}

func runOn(t testing.TB, cal *calib.Result, opt Options) *Result {
	t.Helper()
	res, err := Run(context.Background(), cal, opt)
	if err != nil {
		t.Fatal(err)
	}
	return res
}
