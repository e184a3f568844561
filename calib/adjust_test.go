package calib

import "testing"

// Printed settings that agree with what calib read change nothing and
// are not listed; ones that differ are carried out by calib's rule
// (TakePrinted) and listed.
func TestApplyPrintedListsOnlyChanges(t *testing.T) {
	r := &Result{GainMMPerMV: 10, SpeedMMPerS: 25, SpeedFrom: SpeedPulse, GainFrom: GainPulse, Pulses: []Pulse{{HeightMM: 10, WidthMM: 5}}}
	if r.Apply(Adjustment{Kind: AdjustPrinted, SpeedMMPerS: 25, GainMMPerMV: 10}) {
		t.Errorf("agreeing printed settings reported as a change: %+v", r)
	}
	if !r.Apply(Adjustment{Kind: AdjustPrinted, SpeedMMPerS: 50}) || r.SpeedMMPerS != 50 || r.SpeedFrom != SpeedPrinted {
		t.Errorf("printed 50 mm/s over a 200 ms pulse at 25: %g mm/s from %q", r.SpeedMMPerS, r.SpeedFrom)
	}
	if !r.Apply(Adjustment{Kind: AdjustByHand, GainMMPerMV: 20}) || r.GainMMPerMV != 20 || r.GainFrom != GainStated {
		t.Errorf("gain by hand: %g mm/mV from %q", r.GainMMPerMV, r.GainFrom)
	}
}
