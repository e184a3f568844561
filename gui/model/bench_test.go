package model

import (
	"math"
	"testing"

	"tracelift/axis"
	"tracelift/record"
)

// axisBackend is the fake reading of model_test.go with the real
// measurement engine behind Measure.
type axisBackend struct{ *fakeBackend }

func (b axisBackend) Measure(rec *record.Record, q map[string]float64) (*Summary, error) {
	f, err := axis.Measure(rec, axis.Options{LeadQuality: q})
	if err != nil {
		return nil, err
	}
	n := func(v axis.Num) float64 {
		if !v.OK() {
			return math.NaN()
		}
		return float64(v)
	}
	return &Summary{Values: []Value{
		{Key: "heart_rate_bpm", Label: "Heart rate", Unit: "bpm", V: n(f.HeartRateBPM), SD: n(f.HeartRateSD)},
		{Key: "qrs", Label: "QRS", Unit: "ms", V: n(f.IntervalsMS.QRS), SD: n(f.IntervalsMS.QRSSD)},
		{Key: "qrs_deg", Label: "QRS axis", Unit: "°", V: n(f.Axis.QRSDeg), SD: n(f.Axis.QRSDegSD)},
	}, QRSAxisDeg: n(f.Axis.QRSDeg), AxisClass: f.Axis.QRSCategory, Transition: f.Transition, Caution: f.Caution}, nil
}

// An edit that flattens lead I over the whole 10 s PTB s0010_re strip
// (PTB Diagnostic ECG Database, PhysioNet) must move the frontal QRS axis
// measured by the real engine; undo must give back the first findings
// exactly.
func TestEditMovesRealFindings(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the measurement engine")
	}
	m := open(t, newFake(t), "")
	m.b = axisBackend{m.b.(*fakeBackend)}
	m.recompute()
	if m.MeasureErr() != nil {
		t.Fatal(m.MeasureErr())
	}
	q0, _ := m.Summary().Get("qrs_deg")
	if math.IsNaN(q0.V) {
		t.Fatal("no QRS axis on the raw record")
	}
	// Swapping the names of I and aVF (a panel read the wrong way round)
	// puts I's net deflection on the 90° axis and aVF's on 0° (common
	// practice: I is the 0° lead, aVF the +90° lead), so the axis must move.
	if err := m.Edit(record.Correction{Kind: record.CorrAssign, Lead: "I", NewLead: "aVF"}); err != nil {
		t.Fatal(err)
	}
	q1, _ := m.Summary().Get("qrs_deg")
	if math.Abs(q1.V-q0.V) < 1 {
		t.Fatalf("QRS axis %v -> %v: the edit did not reach the findings", q0.V, q1.V)
	}
	m.Undo()
	q2, _ := m.Summary().Get("qrs_deg")
	if math.Float64bits(q2.V) != math.Float64bits(q0.V) {
		t.Fatalf("undo gave %v, want %v exactly", q2.V, q0.V)
	}
}

// BenchmarkEditRemeasure is one edit as the app makes it: apply the
// corrections from the raw record and measure it again with the real
// engine, on a 12-lead 10 s record at 500 Hz (PTB s0010_re). The goal is
// at most 200 ms per edit.
func BenchmarkEditRemeasure(b *testing.B) {
	m := open(b, newFake(b), "")
	m.b = axisBackend{m.b.(*fakeBackend)}
	m.recompute()
	c := record.Correction{Kind: record.CorrShift, Lead: "II", StartS: 2, EndS: 3, OffsetMV: 0.1}
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		if err := m.Edit(c); err != nil {
			b.Fatal(err)
		}
		b.StopTimer()
		m.Undo()
		b.StartTimer()
	}
}
