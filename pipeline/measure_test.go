package pipeline

import (
	"context"
	"math"
	"testing"

	"tracelift/axis"
	"tracelift/calib"
	"tracelift/record"
	"tracelift/record/wfdb"
	"tracelift/samples"
)

// PTB s0010_re (PTB Diagnostic ECG Database, PhysioNet; a real 12-lead
// recording): the frontal QRS axis measured on a rendered and digitized
// printout of this record must fall within 5° of the axis measured on the
// original file (the target the project set for image-derived axes).
func TestPTBAxisThroughTheImage(t *testing.T) {
	if testing.Short() {
		t.Skip("renders and digitizes a full page")
	}
	rec, err := wfdb.ReadRecord("../../shared/data/ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	orig := rec.Window(record.Standard12, 500, 0, 10) // the first 10 s
	want, err := axis.Measure(orig, axis.Options{})
	if err != nil {
		t.Fatal(err)
	}
	po, err := samples.Render(orig, samples.DefaultStyle())
	if err != nil {
		t.Fatal(err)
	}
	o, err := ProcessPage(context.Background(), &calib.Page{Image: po.Image, Path: "s0010_re-rendered"}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if o.Findings == nil {
		t.Fatalf("no findings: %v", o.MeasureErr)
	}
	got := o.Findings
	d := math.Abs(math.Mod(float64(got.Axis.QRSDeg-want.Axis.QRSDeg)+540, 360) - 180)
	t.Logf("QRS axis: original %.1f°, through the image %.1f° (difference %.1f°); rate %.1f vs %.1f bpm",
		want.Axis.QRSDeg, got.Axis.QRSDeg, d, want.HeartRateBPM, got.HeartRateBPM)
	if d > 5 {
		t.Errorf("QRS axis through the image differs by %.1f°, want ≤ 5°", d)
	}
	if hr := math.Abs(float64(got.HeartRateBPM - want.HeartRateBPM)); hr > 1 {
		t.Errorf("heart rate differs by %.1f bpm, want ≤ 1", hr)
	}
}

// A digitization is deterministic: the same image gives the same
// signals bit for bit (hand corrections are re-applied to it on reopening).
func TestDeterministic(t *testing.T) {
	d := samples.DefaultDemo()
	var first *record.Record
	for i := 0; i < 2; i++ {
		pg, err := calib.Decode(d.Data, d.Name, calib.LoadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		o, err := ProcessPage(context.Background(), pg, Options{})
		if err != nil {
			t.Fatal(err)
		}
		rec := o.Digitized.Record
		if first == nil {
			first = rec
			continue
		}
		if len(rec.Signals) != len(first.Signals) {
			t.Fatalf("%d leads then %d", len(first.Signals), len(rec.Signals))
		}
		for k := range rec.Signals {
			a, b := first.Signals[k], rec.Signals[k]
			if a.Lead != b.Lead || a.StartS != b.StartS || len(a.MV) != len(b.MV) {
				t.Fatalf("lead %d differs: %s %v %d vs %s %v %d", k, a.Lead, a.StartS, len(a.MV), b.Lead, b.StartS, len(b.MV))
			}
			for j := range a.MV {
				if math.Float64bits(a.MV[j]) != math.Float64bits(b.MV[j]) {
					t.Fatalf("lead %s sample %d: %v then %v", a.Lead, j, a.MV[j], b.MV[j])
				}
			}
		}
	}
}
