package axis

import (
	"fmt"
	"math"
)

// transition finds where R/|S| crosses 1 across V1..V6 (r and s indexed
// 0..5, NaN where a lead is missing), interpolating log(R/|S|) linearly
// between neighbouring leads. It returns the position (1 = V1 … 6 = V6),
// a label ("V3/V4", "V4", "before V1", "after V6") and the class: early
// (at or before V2), normal (V3 or V4, common practice) or late (V5 or
// later). ok is false with fewer than two neighbouring leads.
func transition(r, s []float64) (pos float64, label, class string, ok bool) {
	ratio := make([]float64, 6)
	for i := range 6 {
		ri, si := math.Max(r[i], 0), math.Abs(s[i])
		if math.IsNaN(r[i]) || math.IsNaN(s[i]) {
			ratio[i] = math.NaN()
			continue
		}
		// A floor of 0.01 mV keeps the logarithm finite for pure R or QS.
		ratio[i] = math.Log(math.Max(ri, 0.01) / math.Max(si, 0.01))
	}
	first, last := -1, -1
	for i, v := range ratio {
		if !math.IsNaN(v) {
			if first < 0 {
				first = i
			}
			last = i
		}
	}
	if first < 0 || last == first {
		return math.NaN(), "", "", false
	}
	pos = math.NaN()
	for i := first; i < last; i++ {
		a, b := ratio[i], ratio[i+1]
		if math.IsNaN(a) || math.IsNaN(b) {
			continue
		}
		if a < 0 && b >= 0 {
			pos = float64(i+1) + (0-a)/(b-a)
			break
		}
	}
	switch {
	case !math.IsNaN(pos):
	case ratio[first] >= 0 && first == 0:
		return 1, "before V1", "early", true
	case ratio[last] < 0 && last == 5:
		return 6, "after V6", "late", true
	default:
		return math.NaN(), "", "", false
	}
	lo := math.Floor(pos)
	switch {
	case pos-lo < 0.2:
		label = fmt.Sprintf("V%.0f", lo)
	case pos-lo > 0.8:
		label = fmt.Sprintf("V%.0f", lo+1)
	default:
		label = fmt.Sprintf("V%.0f/V%.0f", lo, lo+1)
	}
	switch {
	case pos < 2.5:
		class = "early"
	case pos <= 4.5:
		class = "normal"
	default:
		class = "late"
	}
	return pos, label, class, true
}
