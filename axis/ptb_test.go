package axis

import (
	"math"
	"testing"

	"tracelift/record/wfdb"
)

// PTB Diagnostic ECG Database record patient001/s0010_re (Bousseljot et
// al. 1995, PhysioNet): a real 12-lead recording of an inferior
// infarction. Its limb leads are recorded, not synthetic, so the check is
// that two independent readings of the frontal QRS axis, the quadrant
// method (I and aVF only) and the least-squares fit over all six limb
// leads, agree within 10° on the original. The frontal direction of the
// QRS in the Frank leads vx (left) and vy (foot), also in the record, is
// logged beside it for information only (Frank and hexaxial frames
// differ; shared data README).
func TestPTBAxisMethodsAgree(t *testing.T) {
	t.Parallel()
	rec, err := wfdb.ReadRecord(shared + "ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	f, err := Measure(rec, Options{})
	if err != nil {
		t.Fatal(err)
	}
	byName := map[string]AxisMethod{}
	for _, m := range f.Axis.Methods {
		byName[m.Method] = m
	}
	lsq, quad, iso := byName["least_squares"].QRSDeg, byName["quadrant"].QRSDeg, byName["isoelectric"].QRSDeg
	if !lsq.OK() || !quad.OK() {
		t.Fatalf("axes not measured: %+v", f.Axis)
	}
	d := math.Abs(angDiff(float64(lsq), float64(quad)))
	vx, vy := f.Lead("vx"), f.Lead("vy")
	frank := math.NaN()
	if vx != nil && vy != nil {
		frank = deg(float64(vy.QRSArea), float64(vx.QRSArea))
	}
	t.Logf("PTB s0010_re QRS axis: least squares %+.1f° ± %.1f°, quadrant %+.1f°, isoelectric %+.1f° (difference lsq–quadrant %.1f°); Frank vx/vy frontal direction %+.1f° (information only)",
		float64(lsq), float64(f.Axis.QRSDegSD), float64(quad), float64(iso), d, frank)
	t.Logf("rate %.1f bpm, PR %.0f, QRS %.0f, QT %.0f ms, QTc Bazett %.0f; P axis %+.0f°, T axis %+.0f°",
		float64(f.HeartRateBPM), float64(f.IntervalsMS.PR), float64(f.IntervalsMS.QRS), float64(f.IntervalsMS.QT),
		float64(f.IntervalsMS.QTcBazett), float64(f.Axis.PDeg), float64(f.Axis.TDeg))
	if !(d <= 10) {
		t.Fatalf("least squares %+.1f° and quadrant %+.1f° differ by %.1f°, want ≤ 10°", float64(lsq), float64(quad), d)
	}
	// Beats: 38.4 s of a regular rhythm; every beat seen once. The record
	// has no reference annotations, so the count is checked against its
	// own rate (the intervals between detections must all be alike).
	if f.Rhythm != "regular" || f.Premature != 0 {
		t.Errorf("rhythm %s with %d premature beats", f.Rhythm, f.Premature)
	}
}
