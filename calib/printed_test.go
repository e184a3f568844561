package calib

import "testing"

// The printed speed against the pulse's width (Result.TakePrinted). A
// pulse is read as the common 200 ms, and carts draw narrower ones, so the
// printed speed (common practice: a 12-lead page prints it) wins over a
// pulse that disagrees, also where the scale came from the pulse and the
// sheet; a speed given by the caller or by hand stays. The printed gain stands in only where
// no pulse gave one.
func TestTakePrinted(t *testing.T) {
	for _, c := range []struct {
		name                string
		in                  Result
		speed, gain         float64
		pulseAssumed        bool
		wantSpeed, wantGain float64
		wantFrom            string
	}{
		{"100 ms pulse at 50 mm/s", Result{Source: "grid", SpeedMMPerS: 25, SpeedFrom: SpeedPulse, GainMMPerMV: 10}, 50, 10, false, 50, 10, SpeedPrinted},
		{"text agrees with pulse", Result{Source: "grid", SpeedMMPerS: 50, SpeedFrom: SpeedPulse, GainMMPerMV: 10}, 50, 10, false, 50, 10, SpeedPulse},
		{"no pulse, text 50", Result{Source: "grid", SpeedMMPerS: 25, SpeedFrom: SpeedAssumed, GainMMPerMV: 10}, 50, 5, true, 50, 5, SpeedPrinted},
		{"no pulse, text 25", Result{Source: "grid", SpeedMMPerS: 25, SpeedFrom: SpeedAssumed, GainMMPerMV: 10}, 25, 0, true, 25, 10, SpeedPrinted},
		{"pulse gain kept", Result{Source: "grid", SpeedMMPerS: 25, SpeedFrom: SpeedPulse, GainMMPerMV: 10}, 0, 20, false, 25, 10, SpeedPulse},
		{"stated speed kept", Result{Source: "grid", SpeedMMPerS: 25, SpeedFrom: SpeedStated, GainMMPerMV: 10}, 50, 0, true, 25, 10, SpeedStated},
		{"by hand kept", Result{Source: "user", SpeedMMPerS: 25, SpeedFrom: SpeedAssumed, GainMMPerMV: 10}, 50, 5, true, 25, 10, SpeedAssumed},
		{"scale from the pulse", Result{Source: "pulse", SpeedMMPerS: 25, SpeedFrom: SpeedPulse, GainMMPerMV: 10}, 50, 0, false, 50, 10, SpeedPrinted},
		{"nothing read", Result{Source: "grid", SpeedMMPerS: 25, SpeedFrom: SpeedAssumed, GainMMPerMV: 10}, 0, 0, true, 25, 10, SpeedAssumed},
	} {
		t.Run(c.name, func(t *testing.T) {
			r := c.in
			r.TakePrinted(c.speed, c.gain, c.pulseAssumed)
			if r.SpeedMMPerS != c.wantSpeed || r.GainMMPerMV != c.wantGain || r.SpeedFrom != c.wantFrom {
				t.Errorf("got %g mm/s (%s) %g mm/mV, want %g mm/s (%s) %g mm/mV", r.SpeedMMPerS, r.SpeedFrom, r.GainMMPerMV, c.wantSpeed, c.wantFrom, c.wantGain)
			}
			if r.SpeedMMPerS != c.in.SpeedMMPerS && len(r.Warnings) == 0 {
				t.Errorf("speed changed without a warning")
			}
		})
	}
}

// settleSettings says where the speed came from: a pulse of 200 ms at a
// standard speed, none (assumed), or a half-width pulse that is 12.5 mm/s
// or a 100 ms pulse at 25 mm/s, taken as 25 and said to be assumed.
func TestSettleSpeedFrom(t *testing.T) {
	for _, c := range []struct {
		name  string
		ps    []Pulse
		opt   Options
		speed float64
		from  string
	}{
		{"5 mm pulse", []Pulse{{HeightMM: 10, WidthMM: 5}}, Options{}, 25, SpeedPulse},
		{"10 mm pulse", []Pulse{{HeightMM: 10, WidthMM: 10}}, Options{}, 50, SpeedPulse},
		{"2.5 mm pulse", []Pulse{{HeightMM: 10, WidthMM: 2.5}}, Options{}, 25, SpeedAssumed},
		{"no pulse", nil, Options{}, 25, SpeedAssumed},
		{"no pulse, stated", nil, Options{StatedSpeedMMPerS: 50}, 50, SpeedStated},
	} {
		_, sp, from, _ := settleSettings(c.ps, c.opt)
		if sp != c.speed || from != c.from {
			t.Errorf("%s: %g mm/s from %q, want %g from %q", c.name, sp, from, c.speed, c.from)
		}
	}
}
