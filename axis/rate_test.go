package axis

import (
	"strings"
	"testing"

	"tracelift/record"
)

// A record whose rate is absurdly high (a CSV time step of 1e-300 s) is
// refused with a message, never a panic: the windows of the detector are
// rate × seconds samples and overflowed an int.
func TestAbsurdRateRefused(t *testing.T) {
	for _, hz := range []float64{1e300, 1e12, MaxRateHz * 1.01} {
		mv := make([]float64, 5000)
		rec := &record.Record{Signals: []record.Signal{{Lead: "II", RateHz: hz, MV: mv}}}
		_, err := Measure(rec, Options{})
		if err == nil {
			t.Errorf("%g Hz: measured", hz)
			continue
		}
		if f, err2 := detectLead(&rec.Signals[0]); f != nil || err2 == nil || !strings.Contains(err2.Error(), "check") {
			t.Errorf("%g Hz: detectLead gave %v, %v", hz, f, err2)
		}
	}
}
