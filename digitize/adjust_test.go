package digitize

import (
	"bytes"
	"reflect"
	"testing"

	"tracelift/calib"
	"tracelift/samples"
)

// Run never changes the calibration it is given: an upside-down page is
// turned on Run's own copy, the turn is returned as a typed adjustment
// and the copy it traced on as Result.Calib, and the input keeps its
// images, pixels, turn and warnings. The turned page must still read as
// the renderer drew it (20 dB median, the rotated-page goal of our
// accuracy issue).
func TestRunLeavesItsInputAlone(t *testing.T) {
	p := render(t, dipoleRecord(2), samples.DefaultStyle())
	cal := truthCal(p)
	cal.Apply(calib.Adjustment{Kind: calib.AdjustHalfTurn}) // the pulses now sit at the right
	cal.Turned, cal.Warnings = 0, nil
	before := *cal
	before.Pulses = append([]calib.Pulse(nil), cal.Pulses...)
	pix := bytes.Clone(cal.Ink.Pix)
	res := runOn(t, cal, Options{})
	if !reflect.DeepEqual(*cal, before) || !bytes.Equal(cal.Ink.Pix, pix) {
		t.Errorf("Run changed its input: turned %d, %d warnings, same ink %v", cal.Turned, len(cal.Warnings), bytes.Equal(cal.Ink.Pix, pix))
	}
	if len(res.Adjustments) == 0 || res.Adjustments[0].Kind != calib.AdjustHalfTurn {
		t.Fatalf("adjustments %+v, want a half turn first", res.Adjustments)
	}
	if res.Calib == nil || res.Calib == cal || res.Calib.Turned != 2 {
		t.Fatalf("Result.Calib %p (input %p) not the turned copy", res.Calib, cal)
	}
	if med := medianSNR(scoreLeads(p.Truth.Signals, res.Record)); med < 20 {
		t.Errorf("median SNR %.1f dB on the turned page, want ≥ 20", med)
	}
}
