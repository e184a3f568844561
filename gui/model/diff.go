package model

import (
	"fmt"
	"math"
	"strings"

	"tracelift/record"
)

// Format writes a value with its uncertainty for people: "72 ± 3 bpm",
// record.Missing when not measured.
func (v Value) Format() string {
	if math.IsNaN(v.V) || math.IsInf(v.V, 0) {
		return record.Missing
	}
	s := fmt.Sprintf("%.0f", v.V)
	if !math.IsNaN(v.SD) && !math.IsInf(v.SD, 0) && v.SD > 0 {
		s += fmt.Sprintf(" ± %.0f", v.SD)
	}
	if v.Unit != "" {
		if v.Unit == "°" {
			s += v.Unit
		} else {
			s += " " + v.Unit
		}
	}
	return s
}

// Diff lists what differs between two summaries, as shown after an edit:
// each value whose rounded reading changed, and changed words (axis class,
// transition, rhythm, flags).
func Diff(before, after *Summary) []Change {
	if before == nil && after == nil {
		return nil
	}
	if before == nil || after == nil {
		b, a := "measured", "measured"
		if before == nil {
			b = "not measured"
		}
		if after == nil {
			a = "not measured"
		}
		if a == b {
			return nil
		}
		return []Change{{Label: "Measurements", Before: b, After: a}}
	}
	var out []Change
	for _, av := range after.Values {
		bv, _ := before.Get(av.Key)
		if bv.Key == "" {
			bv = Value{V: math.NaN(), SD: math.NaN(), Unit: av.Unit}
		}
		if bv.Format() != av.Format() {
			out = append(out, Change{Label: av.Label, Before: bv.Format(), After: av.Format()})
		}
	}
	words := func(label, b, a string) {
		if a != b {
			out = append(out, Change{Label: label, Before: orDash(b), After: orDash(a)})
		}
	}
	words("Axis", before.AxisClass, after.AxisClass)
	words("Transition", before.Transition, after.Transition)
	words("Rhythm", before.Rhythm, after.Rhythm)
	words("Flags", strings.Join(before.Flags, "; "), strings.Join(after.Flags, "; "))
	return out
}

func orDash(s string) string {
	if s == "" {
		return record.Missing
	}
	return s
}
