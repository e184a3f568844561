package axis

import (
	"fmt"
	"math"
	"testing"

	"tracelift/record"
	"tracelift/samples/dipole"
)

// limbFromVector builds the six limb-lead net values a frontal heart
// vector of direction d and unit size produces in Einthoven's triangle:
// I, II, III read the projection; the augmented leads √3/2 of it
// (Goldberger 1942).
func limbFromVector(d float64) map[string]float64 {
	out := map[string]float64{}
	for l, th := range map[string]float64{"I": 0, "II": 60, "III": 120, "aVR": -150, "aVL": -30, "aVF": 90} {
		v := math.Cos((d - th) * math.Pi / 180)
		if l == "aVR" || l == "aVL" || l == "aVF" {
			v *= math.Sqrt(3) / 2
		}
		out[l] = v
	}
	return out
}

// The hexaxial angles (common practice): I 0°, II +60°, III +120°,
// aVR −150°, aVL −30°, aVF +90°.
func TestHexaxialAngles(t *testing.T) {
	t.Parallel()
	want := map[string]float64{"I": 0, "II": 60, "III": 120, "aVR": -150, "aVL": -30, "aVF": 90}
	for l, d := range want {
		if hexaxial[l] != d {
			t.Errorf("%s at %v°, want %v°", l, hexaxial[l], d)
		}
		// A vector along a lead's own direction is read by all three
		// methods as that direction.
		net := limbFromVector(d)
		for name, got := range map[string]float64{"lsq": first(axisLSQ(net)), "quadrant": first(axisQuadrant(net)), "iso": firstIso(net)} {
			if math.Abs(angDiff(got, d)) > 1e-6 {
				t.Errorf("vector along %s: %s reads %v°", l, name, got)
			}
		}
	}
}

func first(v float64, _ string, _ bool) float64 { return v }
func firstIso(net map[string]float64) float64 {
	v, _, _, _ := axisIsoelectric(net)
	return v
}

// Common practice: lead III isoelectric with I and aVF positive puts the
// axis at about +30°, and aVR is then negative.
func TestIsoelectricLeadIII(t *testing.T) {
	t.Parallel()
	net := map[string]float64{"I": 1.0, "II": 1.0, "III": 0.02, "aVR": -0.85, "aVL": 0.42, "aVF": 0.5}
	v, classical, detail, ok := axisIsoelectric(net)
	if !ok {
		t.Fatal(detail)
	}
	if classical != 30 {
		t.Fatalf("classical reading %v°, want +30° (%s)", classical, detail)
	}
	if math.Abs(v-30) > 3 {
		t.Fatalf("refined reading %v°, want about +30°", v)
	}
	// The same vector built from the triangle: aVR comes out negative.
	if n := limbFromVector(30); !(n["aVR"] < 0) || math.Abs(n["III"]) > 1e-9 {
		t.Fatalf("axis +30°: aVR %v, III %v", n["aVR"], n["III"])
	}
	// And the other two methods agree.
	if a := first(axisLSQ(limbFromVector(30))); math.Abs(a-30) > 1e-6 {
		t.Fatalf("least squares %v", a)
	}
}

// Category boundaries of the AHA/ACCF/HRS 2009 recommendations
// (Surawicz et al., Circulation 119:e235): normal −30° to +90°, left axis
// deviation −30° to −90°, right +90° to +180°, extreme −90° to ±180°.
func TestCategoryBoundaries(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		deg  float64
		want string
	}{
		{0, "normal"}, {-30, "normal"}, {90, "normal"}, {60, "normal"},
		{-31, "left"}, {-60, "left"}, {-90, "left"},
		{91, "right"}, {150, "right"}, {180, "right"}, {-180, "right"},
		{-91, "extreme"}, {-150, "extreme"}, {-179, "extreme"},
		{math.NaN(), "undetermined"},
	} {
		if got := Category(c.deg); got != c.want {
			t.Errorf("Category(%v) = %s, want %s", c.deg, got, c.want)
		}
	}
}

// Synthetic dipole records (samples/dipole) with the QRS, P and T axes
// set every 15° round the circle: on the clean signal each method reads
// the dipole's own frontal direction within 3°.
func TestAxisRoundTheCircle(t *testing.T) {
	t.Parallel()
	step := 15.0
	if testing.Short() {
		step = 45
	}
	for a := -165.0; a <= 180; a += step {
		t.Run(fmt.Sprint(a), func(t *testing.T) {
			p := dipole.Params{QRSAxisDeg: a + 1e-9, PAxisDeg: wrap(a+40) + 1e-9, TAxisDeg: wrap(a-70) + 1e-9, DurationS: 6}
			tr := p.Truth()
			f, err := Measure(dipole.Generate(p), Options{})
			if err != nil {
				t.Fatal(err)
			}
			nearBoundary := false
			for _, b := range []float64{-30, 90, -90, 180} {
				if math.Abs(angDiff(tr.QRSAxisDeg, b)) < 3 {
					nearBoundary = true
				}
			}
			if !nearBoundary && f.Axis.QRSCategory != Category(tr.QRSAxisDeg) {
				t.Errorf("category %s, truth %s", f.Axis.QRSCategory, Category(tr.QRSAxisDeg))
			}
			for _, m := range f.Axis.Methods {
				for _, c := range []struct {
					name      string
					got, want float64
				}{
					{"QRS", float64(m.QRSDeg), tr.QRSAxisDeg},
					{"P", float64(m.PDeg), tr.PAxisDeg},
					{"T", float64(m.TDeg), tr.TAxisDeg},
				} {
					if d := math.Abs(angDiff(c.got, c.want)); !(d <= 3) {
						t.Errorf("%s %s axis %.1f°, truth %.1f°", m.Method, c.name, c.got, c.want)
					}
				}
			}
		})
	}
}

// A 3x4 printout: I, II, III cover 0–2.5 s, aVR, aVL, aVF 2.5–5 s, V1–V3
// 5–7.5 s, V4–V6 7.5–10 s, plus a 10 s rhythm strip of lead II. The limb
// leads are never simultaneous, yet the axes from the per-lead median
// beats still match the dipole's truth (samples/dipole), and the beats are
// found on the rhythm strip.
func TestThreeByFourWindows(t *testing.T) {
	t.Parallel()
	// At −30° lead II is nearly isoelectric (its QRS tiny, its T wave
	// not): the beats must then come from the other leads.
	for _, c := range []struct {
		axis     float64
		beatLead string
	}{{60, "II"}, {-30, ""}, {150, ""}} {
		t.Run(fmt.Sprint(c.axis), func(t *testing.T) {
			p := dipole.Params{QRSAxisDeg: c.axis, NoiseMV: 0.01, Seed: 4}
			full := dipole.Generate(p)
			tr := p.Truth()
			rec := &record.Record{Name: "3x4"}
			for i, l := range record.Standard12 {
				s := full.Lead(l)
				w := float64(i / 3)
				seg := record.Signal{Lead: l, RateHz: s.RateHz, StartS: 2.5 * w}
				seg.MV = append([]float64(nil), s.MV[int(2.5*w*s.RateHz):int(2.5*(w+1)*s.RateHz)]...)
				for k := 400; k < 420; k++ { // a digitizer gap
					seg.MV[k] = math.NaN()
				}
				if l == record.II {
					// The long strip carries the name; the panel copy is
					// kept under another name.
					rec.Signals = append(rec.Signals, record.Signal{Lead: "II", RateHz: s.RateHz, MV: append([]float64(nil), s.MV...)})
					seg.Lead = "II panel"
				}
				rec.Signals = append(rec.Signals, seg)
			}
			f, err := Measure(rec, Options{})
			if err != nil {
				t.Fatal(err)
			}
			if c.beatLead != "" && f.BeatLead != c.beatLead {
				t.Errorf("beats found on %s, want %s", f.BeatLead, c.beatLead)
			}
			if d := math.Abs(float64(f.HeartRateBPM) - tr.HeartRateBPM); !(d <= 2) {
				t.Errorf("rate %.1f, truth %.1f", f.HeartRateBPM, tr.HeartRateBPM)
			}
			if d := math.Abs(angDiff(float64(f.Axis.QRSDeg), tr.QRSAxisDeg)); !(d <= 5) {
				t.Errorf("QRS axis %.1f, truth %.1f", f.Axis.QRSDeg, tr.QRSAxisDeg)
			}
			for _, l := range []string{"aVF", "V1", "V6"} {
				lm := f.Lead(l)
				if lm == nil || lm.Beats < 2 || lm.Beats > 4 {
					t.Errorf("%s: median of %v beats, want the 2–4 in its 2.5 s window", l, lm)
				}
			}
			if t.Failed() {
				t.Log(f.Summary())
			}
		})
	}
}
