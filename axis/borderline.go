package axis

import (
	"fmt"
	"math"
	"strings"
)

// Category limits checked against the 90 % intervals. The axis limits
// are those of Category (AHA/ACCF/HRS 2009); rate 50 and 100 bpm, PR 120
// and 200 ms, QRS 120 ms and QTc 460 ms are the flags' limits (see flags).
type limit struct {
	measure      string
	at           float64
	below, above string
	unit         string
}

var limits = []limit{
	{"heart_rate", 50, "bradycardia", "normal rate", "bpm"},
	{"heart_rate", 100, "normal rate", "tachycardia", "bpm"},
	{"pr", 120, "short PR", "normal PR", "ms"},
	{"pr", 200, "normal PR", "long PR", "ms"},
	{"qrs", 120, "normal QRS", "wide QRS", "ms"},
	{"qtc_bazett", 460, "normal QTc", "long QTc", "ms"},
}

// axisBoundaries are the category boundaries on the hexaxial circle, in
// increasing order over one turn starting at −180°.
var axisBoundaries = []float64{-90, -30, 90, 180}

// borderlines fills f.Borderline and the axis's category range from the
// 90 % intervals.
func borderlines(f *Findings) {
	iv := f.IntervalsMS
	val := map[string][3]Num{
		"heart_rate": {f.HeartRateBPM, f.HeartRateCI90[0], f.HeartRateCI90[1]},
		"pr":         {iv.PR, iv.PRCI90[0], iv.PRCI90[1]},
		"qrs":        {iv.QRS, iv.QRSCI90[0], iv.QRSCI90[1]},
		"qtc_bazett": {iv.QTcBazett, iv.QTcBazettCI90[0], iv.QTcBazettCI90[1]},
	}
	for _, l := range limits {
		v := val[l.measure]
		if !v[0].OK() || !v[1].OK() || !v[2].OK() {
			continue
		}
		if float64(v[1]) < l.at && float64(v[2]) > l.at {
			f.Borderline = append(f.Borderline, Borderline{Measure: l.measure, Limit: l.at, Below: l.below, Above: l.above,
				Message: fmt.Sprintf("%s %.0f %s (90 %% interval %.0f to %.0f) is borderline: %s or %s (limit %.0f %s)",
					measureName(l.measure), float64(v[0]), l.unit, float64(v[1]), float64(v[2]), l.below, l.above, l.at, l.unit)})
		}
	}
	a := &f.Axis
	cats := axisCategories(a.QRSDeg, a.QRSDegCI90)
	if len(cats) > 1 {
		a.QRSCategoryRange = strings.Join(cats, " or ")
		lo, hi := float64(a.QRSDegCI90[0]), float64(a.QRSDegCI90[1])
		for _, b := range crossed(lo, hi) {
			below, above := Category(b-0.5), Category(b+0.5)
			f.Borderline = append(f.Borderline, Borderline{Measure: "qrs_axis", Limit: b, Below: below, Above: above,
				Message: fmt.Sprintf("QRS axis %+.0f° (90 %% interval %+.0f° to %+.0f°) is borderline: %s or %s (limit %+.0f°)",
					float64(a.QRSDeg), lo, hi, below, above, b)})
		}
	}
}

func measureName(m string) string {
	switch m {
	case "heart_rate":
		return "heart rate"
	case "pr":
		return "PR"
	case "qrs":
		return "QRS"
	case "qtc_bazett":
		return "QTc (Bazett)"
	}
	return m
}

// crossed returns the category boundaries strictly inside (lo, hi),
// wrapped to (−180, 180], in the order met from lo.
func crossed(lo, hi float64) []float64 {
	var out []float64
	if hi-lo >= 360 {
		return append(out, axisBoundaries...)
	}
	for k := math.Floor((lo+180)/360) - 1; k <= math.Ceil((hi+180)/360)+1; k++ {
		for _, b := range axisBoundaries {
			if x := b + 360*k; x > lo && x < hi {
				out = append(out, wrap(x))
			}
		}
	}
	return out
}

// axisCategories lists the categories an axis interval reaches, the
// value's own first; one entry when the interval stays in one category.
func axisCategories(v Num, ci [2]Num) []string {
	if !v.OK() {
		return nil
	}
	out := []string{Category(float64(v))}
	if !ci[0].OK() || !ci[1].OK() {
		return out
	}
	seen := map[string]bool{out[0]: true}
	add := func(c string) {
		if !seen[c] {
			seen[c] = true
			out = append(out, c)
		}
	}
	lo, hi := float64(ci[0]), float64(ci[1])
	add(Category(lo))
	for _, b := range crossed(lo, hi) {
		add(Category(b - 0.5))
		add(Category(b + 0.5))
	}
	add(Category(hi))
	return out
}

// borderlineOf returns the borderline entry of measure near limit at, or nil.
func (f *Findings) borderlineOf(measure string, at float64) *Borderline {
	for i := range f.Borderline {
		if b := &f.Borderline[i]; b.Measure == measure && b.Limit == at {
			return b
		}
	}
	return nil
}
