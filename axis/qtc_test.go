package axis

import (
	"math"
	"testing"
)

// Worked values of the published rate corrections for QT 400 ms at RR
// 0.8 s (75 bpm): Bazett (1920) 400/√0.8 = 447 ms, Fridericia (1920)
// 400/∛0.8 = 431 ms, Framingham (Sagie et al. 1992) 400 + 154·0.2 = 431 ms,
// Hodges (1983) 400 + 1.75·15 = 426 ms (each formula evaluated by hand
// from its published form).
func TestQTcWorkedValues(t *testing.T) {
	t.Parallel()
	c := QTc(400, 0.8)
	for _, tc := range []struct {
		name      string
		got, want float64
	}{
		{"Bazett", c.Bazett, 447},
		{"Fridericia", c.Fridericia, 431},
		{"Framingham", c.Framingham, 431},
		{"Hodges", c.Hodges, 426},
	} {
		if math.Round(tc.got) != tc.want {
			t.Errorf("%s: %.2f ms, want %v", tc.name, tc.got, tc.want)
		}
	}
	// At RR 1 s (60 bpm) every correction leaves QT unchanged (all four
	// formulas are normalised to 60 bpm).
	c = QTc(400, 1)
	for _, v := range []float64{c.Bazett, c.Fridericia, c.Framingham, c.Hodges} {
		if math.Abs(v-400) > 1e-9 {
			t.Fatalf("QTc at RR 1 s = %v, want 400", v)
		}
	}
	if c := QTc(400, 0); !math.IsNaN(c.Bazett) {
		t.Fatal("RR 0 must give no QTc")
	}
}
