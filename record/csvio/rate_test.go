package csvio

import (
	"errors"
	"strings"
	"testing"
)

// Time columns whose step gives no ECG rate are refused at the reader
// with a message naming the step and what to check.
func TestAbsurdTimeStep(t *testing.T) {
	for _, c := range []struct{ name, csv string }{
		{"1e-300 s", "time_s,II\n0,0.1\n1e-300,0.2\n2e-300,0.1\n"},
		{"1e-9 s", "time_s,II\n0,0.1\n0.000000001,0.2\n0.000000002,0.1\n"},
		{"10 s", "time_s,II\n0,0.1\n10,0.2\n20,0.1\n"},
	} {
		_, err := Read(strings.NewReader(c.csv))
		var pe *ParseError
		if !errors.As(err, &pe) || !strings.Contains(err.Error(), "check the time column") {
			t.Errorf("%s: %v", c.name, err)
		}
	}
}
