package record_test

import (
	"errors"
	"math"
	"testing"

	"tracelift/record"
	"tracelift/record/wfdb"
)

const sharedData = "../../shared/data/"

// ptb10s reads the first 10 s of the PTB record s0010_re (PTB Diagnostic
// ECG Database, PhysioNet; see ../shared/data/README.md), standard leads
// only.
func ptb10s(t testing.TB) *record.Record {
	t.Helper()
	rec, err := wfdb.ReadRecord(sharedData + "ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	out := &record.Record{Name: rec.Name}
	for _, l := range record.Standard12 {
		s := rec.Lead(l)
		if s == nil {
			t.Fatalf("lead %s missing: %v", l, rec.Leads())
		}
		c := s.Clone()
		c.MV = c.MV[:int(10*c.RateHz)]
		out.Signals = append(out.Signals, c)
	}
	return out
}

func einthovenResidual(r *record.Record, k int) float64 {
	return r.Lead("II").MV[k] - (r.Lead("I").MV[k] + r.Lead("III").MV[k])
}

// A shift of a stretch of lead II by +0.5 mV shows up exactly as a 0.5 mV
// break of Einthoven's law (II = I + III; the shared data README states it
// holds sample by sample in s0010_re within the recorder's rounding) over
// that stretch and nowhere else.
func TestShiftBreaksEinthovenOnlyInStretch(t *testing.T) {
	raw := ptb10s(t)
	got, err := record.Apply(raw, []record.Correction{{Kind: record.CorrShift, Lead: "ii", StartS: 2, EndS: 3, OffsetMV: 0.5}})
	if err != nil {
		t.Fatal(err)
	}
	rate := raw.Lead("II").RateHz // 1000 Hz
	for k := range got.Lead("II").MV {
		tk := float64(k) / rate
		res := einthovenResidual(got, k)
		inside := tk >= 2 && tk <= 3
		switch {
		case inside && math.Abs(res-0.5) > 0.0015: // 3 steps of 0.5 µV, as in the WFDB reader's test
			t.Fatalf("t=%.3f inside: residual %.4f, want 0.5", tk, res)
		case !inside && math.Abs(res) > 0.0015:
			t.Fatalf("t=%.3f outside: residual %.4f, want 0", tk, res)
		}
	}
	if n := len(got.Corrections); n != 1 {
		t.Fatalf("%d corrections recorded, want 1", n)
	}
	if raw.Lead("II").MV[2500] == got.Lead("II").MV[2500] {
		t.Fatal("raw record was modified or shift not applied")
	}
}

func TestEraseRedrawBaselineAssign(t *testing.T) {
	raw := ptb10s(t)
	cases := []struct {
		name  string
		c     record.Correction
		check func(t *testing.T, r *record.Record)
	}{
		{"erase", record.Correction{Kind: record.CorrErase, Lead: "V1", StartS: 1, EndS: 1.5},
			func(t *testing.T, r *record.Record) {
				v := r.Lead("V1").MV
				for k := 1000; k <= 1500; k++ {
					if !math.IsNaN(v[k]) {
						t.Fatalf("sample %d not a gap", k)
					}
				}
				if math.IsNaN(v[999]) || math.IsNaN(v[1501]) {
					t.Fatal("erase spilled past the stretch")
				}
			}},
		{"redraw", record.Correction{Kind: record.CorrRedraw, Lead: "V2",
			// given out of order: Apply sorts by time
			Points: []record.Point{{TS: 4, MV: 1}, {TS: 3, MV: -1}, {TS: 5, MV: 0}}},
			func(t *testing.T, r *record.Record) {
				v := r.Lead("V2").MV
				// linear interpolation by hand: t=3.5 is halfway from -1 to 1,
				// t=4.25 a quarter of the way from 1 to 0.
				want := map[int]float64{3000: -1, 3500: 0, 4000: 1, 4250: 0.75, 5000: 0}
				for k, w := range want {
					if math.Abs(v[k]-w) > 1e-12 {
						t.Fatalf("sample %d = %v, want %v", k, v[k], w)
					}
				}
				if v[2999] != raw.Lead("V2").MV[2999] || v[5001] != raw.Lead("V2").MV[5001] {
					t.Fatal("redraw spilled past its points")
				}
			}},
		{"baseline", record.Correction{Kind: record.CorrBaseline, Lead: "III", OffsetMV: 0.2},
			func(t *testing.T, r *record.Record) {
				// II = I + III now misses by +0.2 mV everywhere.
				for _, k := range []int{0, 1234, 9999} {
					if res := einthovenResidual(r, k); math.Abs(res-0.2) > 0.0015 {
						t.Fatalf("sample %d residual %.4f, want 0.2", k, res)
					}
				}
			}},
		{"assign swaps", record.Correction{Kind: record.CorrAssign, Lead: "V5", NewLead: "v6"},
			func(t *testing.T, r *record.Record) {
				if r.Lead("V6").MV[100] != raw.Lead("V5").MV[100] || r.Lead("V5").MV[100] != raw.Lead("V6").MV[100] {
					t.Fatal("V5 and V6 did not swap")
				}
				if err := r.Validate(); err != nil {
					t.Fatal(err)
				}
			}},
		{"assign new name", record.Correction{Kind: record.CorrAssign, Lead: "V4", NewLead: "V4R"},
			func(t *testing.T, r *record.Record) {
				if r.Lead("V4") != nil || r.Lead("V4R") == nil {
					t.Fatalf("leads %v", r.Leads())
				}
			}},
		{"box leaves samples", record.Correction{Kind: record.CorrBox, Lead: "I", Box: []float64{10, 10, 200, 80}},
			func(t *testing.T, r *record.Record) {
				for i := range r.Signals {
					for k, v := range r.Signals[i].MV {
						if math.Float64bits(v) != math.Float64bits(raw.Signals[i].MV[k]) {
							t.Fatal("box changed samples")
						}
					}
				}
			}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r, err := record.Apply(raw, []record.Correction{tc.c})
			if err != nil {
				t.Fatal(err)
			}
			tc.check(t, r)
		})
	}
}

func TestApplyRejectsBadCorrections(t *testing.T) {
	raw := ptb10s(t)
	bad := []record.Correction{
		{Kind: "smudge", Lead: "I"},
		{Kind: record.CorrShift, Lead: "V7", StartS: 0, EndS: 1},
		{Kind: record.CorrShift, Lead: "I", StartS: 2, EndS: 1},
		{Kind: record.CorrShift, Lead: "I", StartS: 0, EndS: math.NaN()},
		{Kind: record.CorrRedraw, Lead: "I", Points: []record.Point{{TS: 1, MV: 0}}},
		{Kind: record.CorrAssign, Lead: "I", NewLead: " "},
		{Kind: record.CorrBox, Lead: "I", Box: []float64{5, 5, 1, 9}},
		{Kind: record.CorrErase, Lead: "", StartS: 0, EndS: 1},
		{Kind: record.CorrDrawnPanel, Lead: "V7", Box: []float64{1, 1, 9, 9}},
		{Kind: record.CorrDrawnPanel, Lead: "II", Box: []float64{1, 1, 9}},
		{Kind: record.CorrDrawnPanel, Lead: "II", Box: []float64{1, 1, 9, math.Inf(1)}},
		{Kind: record.CorrDrawnPanel, Lead: "", Box: []float64{1, 1, 9, 9}},
	}
	for _, c := range bad {
		if _, err := record.Apply(raw, []record.Correction{c}); err == nil {
			t.Errorf("%+v: no error", c)
		}
	}
	// A drawn panel's lead names one of the twelve (Cabrera's -aVR too,
	// common practice); the samples are the digitizer's business.
	for _, l := range []string{"V3", "avl", "-aVR"} {
		out, err := record.Apply(raw, []record.Correction{{Kind: record.CorrDrawnPanel, Lead: l, Box: []float64{1, 1, 9, 9}}})
		if err != nil {
			t.Fatalf("drawn panel %s: %v", l, err)
		}
		if out.Lead("V3").MV[10] != raw.Lead("V3").MV[10] || len(out.Corrections) != 1 {
			t.Fatal("a drawn panel changed the samples or was not recorded")
		}
	}
	if err := record.CheckCorrection(&record.Correction{Kind: record.CorrDrawnPanel, Lead: "V7", Box: []float64{1, 1, 9, 9}}); !errors.Is(err, record.ErrNotLead) {
		t.Fatalf("V7: %v", err)
	}
	// Far outside the signal is clipped, not a crash.
	if _, err := record.Apply(raw, []record.Correction{{Kind: record.CorrErase, Lead: "I", StartS: -1e300, EndS: 1e300}}); err != nil {
		t.Fatal(err)
	}
}

// Undo is "apply the list minus its last entry": it must give back the
// earlier record bit for bit, gaps and all.
func TestApplyIsDeterministicAndUndoIsExact(t *testing.T) {
	raw := ptb10s(t)
	list := []record.Correction{
		{Kind: record.CorrShift, Lead: "I", StartS: 0.5, EndS: 2.25, OffsetMV: -0.13},
		{Kind: record.CorrErase, Lead: "aVL", StartS: 3, EndS: 3.1},
		{Kind: record.CorrRedraw, Lead: "I", Points: []record.Point{{TS: 1, MV: 0.3}, {TS: 1.7, MV: -0.4}}},
		{Kind: record.CorrAssign, Lead: "V1", NewLead: "V2"},
		{Kind: record.CorrBaseline, Lead: "V2", OffsetMV: 0.05},
	}
	for n := 0; n <= len(list); n++ {
		a, err := record.Apply(raw, list[:n])
		if err != nil {
			t.Fatal(err)
		}
		b, err := record.Apply(raw, list[:n])
		if err != nil {
			t.Fatal(err)
		}
		if !sameBits(a, b) {
			t.Fatalf("applying %d corrections twice differs", n)
		}
		if n == 0 && !sameBits(a, raw) {
			t.Fatal("an empty list changed the record")
		}
	}
}

func sameBits(a, b *record.Record) bool {
	if len(a.Signals) != len(b.Signals) {
		return false
	}
	for i := range a.Signals {
		sa, sb := &a.Signals[i], &b.Signals[i]
		if sa.Lead != sb.Lead || sa.RateHz != sb.RateHz || sa.StartS != sb.StartS || len(sa.MV) != len(sb.MV) {
			return false
		}
		for k := range sa.MV {
			if math.Float64bits(sa.MV[k]) != math.Float64bits(sb.MV[k]) {
				return false
			}
		}
	}
	return true
}
