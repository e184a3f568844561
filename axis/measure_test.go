package axis

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"tracelift/record"
	"tracelift/samples/dipole"
)

func TestMeasureBadInput(t *testing.T) {
	t.Parallel()
	nan := make([]float64, 5000)
	for i := range nan {
		nan[i] = math.NaN()
	}
	for _, c := range []struct {
		name string
		rec  *record.Record
		opt  Options
		want error
	}{
		{"nil", nil, Options{}, nil},
		{"no leads", &record.Record{}, Options{}, nil},
		{"too short", &record.Record{Signals: []record.Signal{{Lead: "II", RateHz: 500, MV: make([]float64, 600)}}}, Options{}, nil},
		{"all gaps", &record.Record{Signals: []record.Signal{{Lead: "II", RateHz: 500, MV: nan}}}, Options{}, ErrNoLead},
		{"flat", &record.Record{Signals: []record.Signal{{Lead: "II", RateHz: 500, MV: make([]float64, 5000)}}}, Options{}, ErrNoBeats},
		{"missing beat lead", dipole.Generate(dipole.Params{DurationS: 4}), Options{BeatLead: "V7"}, nil},
		{"infinite sample", &record.Record{Signals: []record.Signal{{Lead: "II", RateHz: 500, MV: []float64{math.Inf(1)}}}}, Options{}, nil},
	} {
		t.Run(c.name, func(t *testing.T) {
			f, err := Measure(c.rec, c.opt)
			if err == nil {
				t.Fatalf("no error, findings %+v", f)
			}
			if !strings.HasPrefix(err.Error(), "axis: ") {
				t.Errorf("error %q lacks the package prefix", err)
			}
			if c.want != nil && !errors.Is(err, c.want) {
				t.Errorf("error %v, want %v", err, c.want)
			}
		})
	}
}

// Intervals against the dipole generator's own settings
// (samples/dipole Truth): PR, QRS and QT within 15 ms, the rate within
// 1 bpm, at four rates. The generator's wave edges are the ends of
// smooth lobes that start at zero slope, so a measurement that needs a
// visible deflection reads them somewhat inside; 15 ms is this
// package's tolerance for that.
func TestIntervalsDipole(t *testing.T) {
	t.Parallel()
	for _, c := range []struct{ hr, pr, qrs, qt float64 }{
		{60, 180, 90, 400}, {75, 160, 100, 380}, {100, 140, 80, 340}, {50, 200, 130, 440},
	} {
		t.Run(fmt.Sprint(c.hr), func(t *testing.T) {
			p := dipole.Params{HeartRateBPM: c.hr, PRms: c.pr, QRSms: c.qrs, QTms: c.qt, DurationS: 10}
			tr := p.Truth()
			f, err := Measure(dipole.Generate(p), Options{})
			if err != nil {
				t.Fatal(err)
			}
			iv := f.IntervalsMS
			t.Logf("HR %.1f (truth %.1f) PR %.0f (%v) QRS %.0f (%v) QT %.0f (%v)", f.HeartRateBPM, tr.HeartRateBPM, iv.PR, tr.PRms, iv.QRS, tr.QRSms, iv.QT, tr.QTms)
			if d := math.Abs(float64(f.HeartRateBPM) - tr.HeartRateBPM); !(d <= 1) {
				t.Errorf("rate %.1f, truth %.1f", f.HeartRateBPM, tr.HeartRateBPM)
			}
			for _, v := range []struct {
				name      string
				got, want float64
			}{{"PR", float64(iv.PR), tr.PRms}, {"QRS", float64(iv.QRS), tr.QRSms}, {"QT", float64(iv.QT), tr.QTms}} {
				if d := math.Abs(v.got - v.want); !(d <= 15) {
					t.Errorf("%s %.0f ms, truth %.0f", v.name, v.got, v.want)
				}
			}
			// The corrected values are the published formulas applied to
			// the measured QT and mean RR.
			c := QTc(float64(iv.QT), float64(iv.RR)/1000)
			if math.Abs(float64(iv.QTcBazett)-c.Bazett) > 1e-9 || math.Abs(float64(iv.QTcHodges)-c.Hodges) > 1e-9 {
				t.Errorf("QTc fields differ from the formulas")
			}
			if f.Rhythm != "regular" || f.Premature != 0 {
				t.Errorf("rhythm %s, %d premature", f.Rhythm, f.Premature)
			}
		})
	}
}

// Precordial transition against the dipole generator's setting
// (samples/dipole: R/S = 1 at TransitionLead): within half a lead, and
// the class follows (normal transition at V3/V4, common practice).
func TestTransitionDipole(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		at    float64
		class string
	}{{1.8, "early"}, {3.5, "normal"}, {3.0, "normal"}, {5.2, "late"}} {
		t.Run(fmt.Sprint(c.at), func(t *testing.T) {
			p := dipole.Params{TransitionLead: c.at, DurationS: 5}
			f, err := Measure(dipole.Generate(p), Options{})
			if err != nil {
				t.Fatal(err)
			}
			if d := math.Abs(float64(f.TransitionAt) - c.at); !(d <= 0.5) {
				t.Errorf("transition at %.2f (%s), truth %.2f", f.TransitionAt, f.Transition, c.at)
			}
			if f.TransitionCl != c.class {
				t.Errorf("class %s, want %s (at %.2f)", f.TransitionCl, c.class, f.TransitionAt)
			}
		})
	}
	if _, l, _, _ := transition([]float64{0.2, 0.4, 0.6, 0.9, 1.5, 1.4}, []float64{-1.2, -1, -0.9, -0.6, -0.3, -0.1}); l != "V3/V4" {
		t.Errorf("label %q, want V3/V4", l)
	}
}

// Noise and baseline wander: the axes stay within 5° of the dipole's
// directions and the rate within 1 bpm (samples/dipole truth).
func TestNoisyDipole(t *testing.T) {
	t.Parallel()
	for _, seed := range []int64{1, 2, 3} {
		p := dipole.Params{QRSAxisDeg: -15 + 40*float64(seed), NoiseMV: 0.03, WanderMV: 0.2, Seed: seed}
		tr := p.Truth()
		f, err := Measure(dipole.Generate(p), Options{})
		if err != nil {
			t.Fatal(err)
		}
		if d := math.Abs(angDiff(float64(f.Axis.QRSDeg), tr.QRSAxisDeg)); !(d <= 5) {
			t.Errorf("seed %d: QRS axis %.1f, truth %.1f", seed, f.Axis.QRSDeg, tr.QRSAxisDeg)
		}
		if d := math.Abs(angDiff(float64(f.Axis.TDeg), tr.TAxisDeg)); !(d <= 5) {
			t.Errorf("seed %d: T axis %.1f, truth %.1f", seed, f.Axis.TDeg, tr.TAxisDeg)
		}
		if d := math.Abs(float64(f.HeartRateBPM) - tr.HeartRateBPM); !(d <= 1) {
			t.Errorf("seed %d: rate %.1f, truth %.1f", seed, f.HeartRateBPM, tr.HeartRateBPM)
		}
		if !(f.Axis.QRSDegSD > 0) {
			t.Errorf("seed %d: noisy record with axis SD %v", seed, f.Axis.QRSDegSD)
		}
	}
}

// Swapping the arm electrodes turns lead I over, exchanges II and III and
// aVR and aVL (common practice); the flag must rise on the swapped record
// and not on the original. The record's QRS axis is +20° so that aVL,
// which becomes aVR, is positive.
func TestLimbLeadReversalFlag(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{DurationS: 5, QRSAxisDeg: 20, PAxisDeg: 40})
	if hasFlag(mustMeasure(t, rec), "limb_lead_reversal") {
		t.Fatal("flag on the correct record")
	}
	sw := rec.Clone()
	get := func(l string) []float64 { return rec.Lead(l).MV }
	neg := func(x []float64) []float64 {
		o := make([]float64, len(x))
		for i, v := range x {
			o[i] = -v
		}
		return o
	}
	sw.Lead("I").MV = neg(get("I"))
	sw.Lead("II").MV, sw.Lead("III").MV = get("III"), get("II")
	sw.Lead("aVR").MV, sw.Lead("aVL").MV = get("aVL"), get("aVR")
	if !hasFlag(mustMeasure(t, sw), "limb_lead_reversal") {
		t.Fatal("no flag on the arm-reversed record")
	}
}

// Low voltage: limb leads all below 0.5 mV peak to peak (common
// practice). Scaling the limb leads to a fifth makes the flag rise.
func TestLowVoltageFlag(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{DurationS: 5})
	if hasFlag(mustMeasure(t, rec), "low_voltage_limb") {
		t.Fatal("flag on a normal-voltage record")
	}
	for _, l := range record.Limb6 {
		for i := range rec.Lead(l).MV {
			rec.Lead(l).MV[i] *= 0.2
		}
	}
	if !hasFlag(mustMeasure(t, rec), "low_voltage_limb") {
		t.Fatal("no flag at a fifth of the voltage")
	}
}

// Sokolow–Lyon (1949): S V1 + R V5/V6 ≥ 3.5 mV. Doubling the precordial
// leads of a record below the limit takes it above.
func TestSokolowLyonFlag(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{DurationS: 5, QRSAmpMV: 1})
	f := mustMeasure(t, rec)
	v := math.Abs(float64(f.Lead("V1").S)) + math.Max(float64(f.Lead("V5").R), float64(f.Lead("V6").R))
	if v >= 3.5 || hasFlag(f, "sokolow_lyon") {
		t.Fatalf("test record already at %.2f mV", v)
	}
	for _, l := range record.Precordial {
		for i := range rec.Lead(l).MV {
			rec.Lead(l).MV[i] *= 3.6 / v
		}
	}
	f = mustMeasure(t, rec)
	if !hasFlag(f, "sokolow_lyon") {
		t.Fatalf("no flag at %.2f mV", math.Abs(float64(f.Lead("V1").S))+math.Max(float64(f.Lead("V5").R), float64(f.Lead("V6").R)))
	}
}

// A lower digitization confidence gives a larger axis uncertainty.
func TestQualityEnlargesUncertainty(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{DurationS: 6, NoiseMV: 0.01, Seed: 5})
	a := mustMeasure(t, rec)
	q := map[string]float64{}
	for _, l := range record.Standard12 {
		q[l] = 0.5
	}
	b, err := Measure(rec, Options{LeadQuality: q})
	if err != nil {
		t.Fatal(err)
	}
	if !(b.Axis.QRSDegSD > a.Axis.QRSDegSD && b.IntervalsMS.QTSD > a.IntervalsMS.QTSD) {
		t.Fatalf("quality 0.5: axis SD %v (vs %v), QT SD %v (vs %v)", b.Axis.QRSDegSD, a.Axis.QRSDegSD, b.IntervalsMS.QTSD, a.IntervalsMS.QTSD)
	}
}

// The JSON carries the field names the benchmarks read (DEVELOPERS.md,
// command-line contract) and null, not NaN, for what was not measured.
func TestJSONFields(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{DurationS: 5})
	f := mustMeasure(t, rec)
	f.Axis.PDeg = NaN()
	b, err := json.Marshal(f)
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"heart_rate_bpm", "intervals_ms", "axis", "transition", "flags", "caution"} {
		if _, ok := m[k]; !ok {
			t.Errorf("no %q", k)
		}
	}
	iv := m["intervals_ms"].(map[string]any)
	for _, k := range []string{"pr", "qrs", "qt", "qtc_bazett", "qtc_fridericia", "qtc_framingham", "qtc_hodges"} {
		if _, ok := iv[k].(float64); !ok {
			t.Errorf("intervals_ms.%s = %v", k, iv[k])
		}
	}
	ax := m["axis"].(map[string]any)
	for _, k := range []string{"qrs_deg", "t_deg", "qrs_category", "methods"} {
		if _, ok := ax[k]; !ok {
			t.Errorf("no axis.%s", k)
		}
	}
	if v, ok := ax["p_deg"]; !ok || v != nil {
		t.Errorf("axis.p_deg = %v, want null", v)
	}
	var back Findings
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	if back.Axis.PDeg.OK() || math.Abs(float64(back.IntervalsMS.QT-f.IntervalsMS.QT)) > 1e-3 {
		t.Errorf("round trip: P %v, QT %v vs %v", back.Axis.PDeg, back.IntervalsMS.QT, f.IntervalsMS.QT)
	}
	if s := f.Summary(); !strings.Contains(s, Caution) || !strings.Contains(s, "QTc") {
		t.Errorf("summary lacks the caution or the QTc:\n%s", s)
	}
}

func mustMeasure(t *testing.T, rec *record.Record) *Findings {
	t.Helper()
	f, err := Measure(rec, Options{})
	if err != nil {
		t.Fatal(err)
	}
	return f
}

func hasFlag(f *Findings, code string) bool {
	for _, fl := range f.Flags {
		if fl.Code == code {
			return true
		}
	}
	return false
}

// BenchmarkMeasure: a 10 s 12-lead record at 500 Hz, as the GUI
// re-measures it after each edit (goal: well under 200 ms).
func BenchmarkMeasure(b *testing.B) {
	rec := dipole.Generate(dipole.Params{NoiseMV: 0.02, WanderMV: 0.1, Seed: 1})
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Measure(rec, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkMeasureLong: the 30 min two-lead style workload (one hour of a
// single lead at 360 Hz would be similar), from a synthetic record.
func BenchmarkMeasureLong(b *testing.B) {
	rec := dipole.Generate(dipole.Params{DurationS: 600, RateHz: 360, NoiseMV: 0.02, Seed: 1})
	rec.Signals = rec.Signals[:2]
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Measure(rec, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// The classic 2, 4, 4, 4, 5, 5, 7, 9: mean 5, squared deviations 32, so
// the sample SD is √(32/7) (population SD 2; from memory).
func TestMeanSD(t *testing.T) {
	m, sd := meanSD([]float64{2, 4, 4, 4, 5, 5, 7, 9})
	if math.Abs(m-5) > 1e-12 || math.Abs(sd-math.Sqrt(32.0/7)) > 1e-12 {
		t.Errorf("meanSD = %v, %v", m, sd)
	}
	if m, sd := meanSD([]float64{3}); m != 3 || !math.IsNaN(sd) {
		t.Errorf("one value: %v, %v", m, sd)
	}
	if m, _ := meanSD(nil); !math.IsNaN(m) {
		t.Errorf("nothing: %v", m)
	}
}
