package pipeline

import (
	"fmt"
	"math"

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

// apply puts the hand-given settings into cal and derives the signals of
// dr again with them: a gain scales every amplitude, a speed the time
// axis of every panel (time 0 stays at the earliest panel's left edge).
// A warning in cal says what was replaced.
func (h ByHand) apply(cal *calib.Result, dr *digitize.Result, rateHz float64) {
	changed := false
	if g := h.GainMMPerMV; g > 0 && !math.IsInf(g, 0) && g != cal.GainMMPerMV {
		cal.Warnings = append(cal.Warnings, fmt.Sprintf("gain %g mm/mV given by hand is used (the page showed %g mm/mV)", g, cal.GainMMPerMV))
		cal.GainMMPerMV = g
		changed = true
	}
	if v := h.SpeedMMPerS; v > 0 && !math.IsInf(v, 0) {
		cal.SpeedFrom = calib.SpeedStated // the user's word, not an assumption
	}
	if v := h.SpeedMMPerS; v > 0 && !math.IsInf(v, 0) && v != cal.SpeedMMPerS {
		cal.Warnings = append(cal.Warnings, fmt.Sprintf("speed %g mm/s given by hand is used (the page showed %g mm/s)", v, cal.SpeedMMPerS))
		k := cal.SpeedMMPerS / v
		for i := range dr.Panels {
			dr.Panels[i].T0S *= k
			dr.Panels[i].T1S *= k
		}
		cal.SpeedMMPerS = v
		changed = true
	}
	if !changed {
		return
	}
	rec := digitize.Signals(cal, dr.Panels, dr.Traces, rateHz)
	rec.Name = dr.Record.Name
	rec.Provenance = dr.Record.Provenance
	rec.Annotations = dr.Record.Annotations
	dr.Record = rec
}
