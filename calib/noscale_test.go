package calib

import (
	"context"
	"math"
	"math/rand"
	"strings"
	"testing"

	"tracelift/samples"
	"tracelift/samples/dipole"
)

// A fax with neither grid nor pulse: the sheet fills the scan, so its
// size (A4, 297 × 210 mm, ISO 216) gives the scale along the fine axis
// (the renderer faxes at 200 × 100 dpi; its truth is the reference).
func TestFaxScaleFromSheet(t *testing.T) {
	rec := dipole.Generate(dipole.Params{Seed: 4})
	st := samples.DefaultStyle()
	st.Grid = samples.GridNone
	st.Pulses = false
	p, err := samples.Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	d := samples.Condition("fax", rand.New(rand.NewSource(11)))
	d.RotationDeg = 0.8
	if p, err = samples.Degrade(p, d); err != nil {
		t.Fatal(err)
	}
	res, err := Detect(context.Background(), &Page{Image: p.Image}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	tr := p.Truth
	if res.Source != "page" || math.Abs(res.PxPerMMX/tr.PxPerMMX-1) > 0.01 || math.Abs(res.PxPerMMY/tr.PxPerMMY-1) > 0.015 {
		t.Errorf("source %q px/mm %.3f×%.3f, truth %.3f×%.3f", res.Source, res.PxPerMMX, res.PxPerMMY, tr.PxPerMMX, tr.PxPerMMY)
	}
	if math.Abs(res.RotationDeg-tr.RotationDeg) > 0.1 {
		t.Errorf("rotation %.3f°, truth %.3f°", res.RotationDeg, tr.RotationDeg)
	}
	if res.Confidence > 0.4 || len(res.Warnings) == 0 {
		t.Errorf("a scale from the sheet's size alone: confidence %.2f, warnings %q", res.Confidence, res.Warnings)
	}
}

// A "pulse" of no standard height (3 mm: not 2.5, 5, 10, 20 or 40 mm/mV,
// Kligfield et al. 2007) is not taken as a gain: 10 mm/mV, the standard,
// is assumed with a warning.
func TestNonStandardPulseGain(t *testing.T) {
	g, sp, _, warn := settleSettings([]Pulse{{HeightMM: 3.05, WidthMM: 5}}, Options{})
	if g != 10 || sp != 25 {
		t.Errorf("gain %v speed %v, want 10 and 25", g, sp)
	}
	if len(warn) == 0 || !strings.Contains(warn[0], "assumed") {
		t.Errorf("warnings %q", warn)
	}
	g, _, _, _ = settleSettings([]Pulse{{HeightMM: 3.05, WidthMM: 5}}, Options{StatedGainMMPerMV: 20})
	if g != 20 {
		t.Errorf("stated 20 mm/mV, got %v", g)
	}
}

// The sheet sizes behind pagePrior: an A4 landscape sheet (297 × 210 mm,
// ISO 216) scanned at 8 px/mm, straight and turned 1° inside a canvas
// grown around it.
func TestPagePrior(t *testing.T) {
	s, _ := pagePrior(297*8, 210*8, 0, 0.015)
	if len(s) == 0 || math.Abs(s[0]-8) > 1e-9 {
		t.Fatalf("straight A4: %v", s)
	}
	th := math.Pi / 180
	c, sn := math.Cos(th), math.Sin(th)
	s, _ = pagePrior(8*(297*c+210*sn), 8*(297*sn+210*c), th, 0.015)
	if len(s) == 0 || math.Abs(s[0]/8-1) > 1e-6 {
		t.Fatalf("turned A4: %v", s)
	}
	if s, _ := pagePrior(4000, 3000, 0, 0.015); len(s) != 0 {
		t.Errorf("a 4:3 photo frame is no sheet: %v", s)
	}
}

// The printed settings may stand in wherever the gain and speed were
// assumed: with no pulse found, and with only a candidate of no standard
// height (kept in the list of pulses); not where a pulse of a standard
// height (10 mm for 1 mV at 10 mm/mV, common practice) was read or the
// user gave the scale. Decided from the pulses, not from the wording of
// the warnings.
func TestSettingsAssumed(t *testing.T) {
	for _, c := range []struct {
		name string
		r    *Result
		want bool
	}{
		{"candidate", &Result{Source: "grid", Pulses: []Pulse{{HeightMM: 3.14}}}, true},
		{"none", &Result{Source: "grid"}, true},
		{"measured", &Result{Source: "grid", Pulses: []Pulse{{HeightMM: 10}}}, false},
		{"measured at 5 mm/mV", &Result{Source: "pulse", Pulses: []Pulse{{HeightMM: 5.1}}}, false},
		{"user", &Result{Source: "user"}, false},
	} {
		if got := c.r.SettingsAssumed(); got != c.want {
			t.Errorf("%s: SettingsAssumed %v, want %v", c.name, got, c.want)
		}
	}
}

// Candidates of two standard heights and the same standard width mixed on
// one page (boxes near 2.5 mm, pulses near 20 mm, all 5 mm wide) give a
// median of no standard gain: the settings are assumed, as settleSettings
// says in its warning.
func TestSettingsAssumedMixedCandidates(t *testing.T) {
	r := &Result{Source: "grid"}
	for _, h := range []float64{2.35, 2.18, 1.88, 2.66, 2.49, 2.32, 19.89, 19.72, 19.6, 19.6} {
		r.Pulses = append(r.Pulses, Pulse{HeightMM: h, WidthMM: 5})
	}
	_, _, _, warn := settleSettings(r.Pulses, Options{})
	if !r.SettingsAssumed() || len(warn) == 0 {
		t.Errorf("SettingsAssumed %v with warnings %q", r.SettingsAssumed(), warn)
	}
}

// The pulses of a page printed at the rows' right ends (bench seed 1 case
// 88: 20 mm/mV, 200 ms at 25 mm/s, so 20 mm tall and 5 mm wide) beside
// label boxes near 2.5 mm tall and 8 mm wide: the boxes are of a standard
// height by chance but of no standard width, and the gain is read from
// the pulses (common practice: the pulse is 1 mV for 200 ms).
func TestPulseGainPrefersStandardWidth(t *testing.T) {
	var ps []Pulse
	for _, h := range []float64{2.35, 2.18, 1.88, 2.66, 1.93, 1.99, 2.49, 2.32} {
		ps = append(ps, Pulse{HeightMM: h, WidthMM: 8.2})
	}
	for _, h := range []float64{19.89, 19.72, 19.6, 19.6} {
		ps = append(ps, Pulse{HeightMM: h, WidthMM: 4.9})
	}
	g, sp, _, warn := settleSettings(ps, Options{})
	if g != 20 || sp != 25 || len(warn) != 0 {
		t.Errorf("read %g mm/mV, %g mm/s, warnings %q; want 20 and 25, none", g, sp, warn)
	}
	if (&Result{Source: "grid", Pulses: ps}).SettingsAssumed() {
		t.Error("settings taken as assumed")
	}
}

// A clean scan of plain paper whose pulses are 100 ms wide (some carts
// draw a shorter step; from memory): read as 200 ms pulses, their 1 mV
// height says 20 mm/mV at half the scale. The sheet (A4, 297 × 210 mm,
// ISO 216) filling the scan agrees with 10 mm/mV at the true scale, and
// the width, no 200 ms pulse's, is then not counted.
func TestNarrowPulseScaleFromSheet(t *testing.T) {
	rec := dipole.Generate(dipole.Params{Seed: 6})
	st := samples.DefaultStyle()
	st.Grid, st.PulseMS, st.DPI, st.Layout = samples.GridNone, 100, 400, samples.Layout6x2
	p, err := samples.Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Detect(context.Background(), &Page{Image: p.Image}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if tr := p.Truth; res.Source != "pulse" || math.Abs(res.PxPerMM/tr.PxPerMMX-1) > 0.01 || res.GainMMPerMV != 10 {
		t.Errorf("source %q px/mm %.3f at %g mm/mV, truth %.3f at 10; warnings %q", res.Source, res.PxPerMM, res.GainMMPerMV, tr.PxPerMMX, res.Warnings)
	}
}
