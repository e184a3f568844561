package record

import (
	"fmt"
	"math"
	"strings"
)

// MVPerUnit returns how many millivolts one unit of a physical-unit name
// ("mV", "uV", "µV", "V", any case) is, and whether the name is known.
func MVPerUnit(unit string) (float64, bool) {
	switch strings.ToLower(strings.TrimSpace(unit)) {
	case "mv":
		return 1, true
	case "uv", "µv", "μv":
		return 0.001, true
	case "v":
		return 1000, true
	}
	return 0, false
}

// Trimmed returns the signal of mv sampled at rateHz whose first sample is
// at t0S, with its leading and trailing gaps cut off (StartS moves to the
// first value), and false when mv holds no value at all.
func Trimmed(lead string, rateHz, t0S float64, mv []float64) (Signal, bool) {
	a, b := 0, len(mv)
	for a < b && math.IsNaN(mv[a]) {
		a++
	}
	for b > a && math.IsNaN(mv[b-1]) {
		b--
	}
	if a == b {
		return Signal{}, false
	}
	return Signal{Lead: lead, RateHz: rateHz, StartS: t0S + float64(a)/rateHz, MV: append([]float64(nil), mv[a:b]...)}, true
}

// Missing is how every face prints a value that was not measured: the
// terminal summaries, the PDF and the desktop app.
const Missing = "—"

// FormatNum writes v with a fmt format that takes one number ("%.0f ms",
// "%+.0f°"), or Missing when v is NaN or infinite.
func FormatNum(format string, v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return Missing
	}
	return fmt.Sprintf(format, v)
}
