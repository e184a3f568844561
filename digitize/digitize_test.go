package digitize

import (
	"math"
	"testing"

	"tracelift/samples"
)

// A clean 300-dpi 3x4+1 printout of a synthetic record, digitized and
// compared with what was drawn (the renderer's truth signals).
func TestClean3x4R1(t *testing.T) {
	p := render(t, dipoleRecord(1), samples.DefaultStyle())
	res := runOn(t, truthCal(p), Options{})
	if res.Layout != "3x4+1" || res.Cabrera {
		t.Fatalf("layout %s cabrera %v, want 3x4+1 standard", res.Layout, res.Cabrera)
	}
	acc := scoreLeads(p.Truth.Signals, res.Record)
	for l, a := range acc {
		t.Logf("%-4s SNR %6.1f dB  r %.4f  shift %+.3f s  cov %.3f", l, a.SNRdB, a.R, a.ShiftS, a.Coverage)
		if math.IsInf(a.SNRdB, -1) {
			t.Errorf("lead %s missing", l)
		}
	}
	if m := medianSNR(acc); m < 25 {
		t.Errorf("median SNR %.1f dB, want ≥ 25 (issue's goal for clean 300-dpi pages)", m)
	}
}
