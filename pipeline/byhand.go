package pipeline

import (
	"tracelift/calib"
	"tracelift/digitize"
)

// ByHand holds recording settings the user typed in. Each one that is set
// (> 0) replaces what calibration and tracing found, whatever the page's
// pulses or printed text say: the user has looked at the page and decided.
// The zero value changes nothing.
type ByHand struct {
	GainMMPerMV float64
	SpeedMMPerS float64
}

// apply has calib put the hand-given settings into cal (an
// calib.AdjustByHand, said in cal's warnings and recorded in the record's
// provenance) and derives the signals of dr again with them: a gain
// scales every amplitude, a speed the time axis of every panel (time 0
// stays at the earliest panel's left edge).
func (h ByHand) apply(cal *calib.Result, dr *digitize.Result, rateHz float64) {
	gain, speed := cal.GainMMPerMV, cal.SpeedMMPerS
	a := calib.Adjustment{Kind: calib.AdjustByHand, GainMMPerMV: h.GainMMPerMV, SpeedMMPerS: h.SpeedMMPerS}
	if !cal.Apply(a) {
		return
	}
	dr.Adjustments = append(dr.Adjustments, a)
	if gain == cal.GainMMPerMV && speed == cal.SpeedMMPerS {
		return
	}
	if k := speed / cal.SpeedMMPerS; k != 1 {
		for i := range dr.Panels {
			dr.Panels[i].T0S *= k
			dr.Panels[i].T1S *= k
		}
	}
	rec := digitize.Signals(cal, dr.Panels, dr.Traces, rateHz)
	rec.Name = dr.Record.Name
	rec.Provenance = dr.Record.Provenance
	rec.Annotations = dr.Record.Annotations
	dr.Record = rec
}
