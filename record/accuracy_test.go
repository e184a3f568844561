package record

import (
	"math"
	"testing"
)

// The SNR definition is the one used across the project:
// 10·log10(Σref²/Σ(ref−est)²) with means removed. A known additive error
// gives a known value: for a unit-amplitude sine (power 1/2) and an error
// sine of amplitude 0.1 (power 0.005) the SNR is 10·log10(100) = 20 dB.
func TestCompareKnownSNR(t *testing.T) {
	ref := Signal{Lead: II, RateHz: 500}
	est := Signal{Lead: II, RateHz: 500, StartS: 0}
	for i := 0; i < 5000; i++ {
		x := float64(i) / 500
		ref.MV = append(ref.MV, math.Sin(2*math.Pi*1.3*x))
		est.MV = append(est.MV, math.Sin(2*math.Pi*1.3*x)+0.1*math.Sin(2*math.Pi*7*x)+0.25)
	}
	a := Compare(&ref, &est, 0, 10)
	if math.Abs(a.SNRdB-20) > 0.2 {
		t.Fatalf("SNR = %.3f dB, want 20", a.SNRdB)
	}
	if a.Coverage < 0.99 {
		t.Fatalf("coverage %.3f", a.Coverage)
	}
}

func TestCompareFindsShift(t *testing.T) {
	ref := Signal{Lead: I, RateHz: 500}
	est := Signal{Lead: I, RateHz: 250, StartS: 0.02} // 20 ms late, half rate
	for i := 0; i < 2500; i++ {
		x := float64(i) / 500
		ref.MV = append(ref.MV, math.Sin(2*math.Pi*2*x)+0.3*math.Sin(2*math.Pi*9*x))
	}
	for i := 0; i < 1250; i++ {
		x := float64(i)/250 + 0.02 - 0.012 // est(t) = ref(t-0.012)
		est.MV = append(est.MV, math.Sin(2*math.Pi*2*x)+0.3*math.Sin(2*math.Pi*9*x))
	}
	a := Compare(&ref, &est, 0.5, 4.5)
	if math.Abs(a.ShiftS-0.012) > 0.0021 {
		t.Fatalf("shift %.4f, want 0.012", a.ShiftS)
	}
	if a.SNRdB < 30 {
		t.Fatalf("SNR %.1f after alignment", a.SNRdB)
	}
}

// The outside evaluation's scoring (../shared/data/outside-printouts/README.md):
// a blank counts as error with the de-meaned estimate taken as 0 there. An
// estimate exact over the first half of a zero-mean sine window and blank
// over the second leaves an error equal to the reference over half the
// window: Σref²/Σerr² = 2, so 10·log10(2) = 3.01 dB, where Compare, which
// skips the blank, reads it as perfect.
func TestCompareStrictCountsBlanks(t *testing.T) {
	ref := Signal{Lead: II, RateHz: 500}
	est := Signal{Lead: II, RateHz: 500}
	for i := 0; i < 5000; i++ {
		v := math.Sin(2 * math.Pi * 1.0 * float64(i) / 500)
		ref.MV = append(ref.MV, v)
		if i < 2500 {
			est.MV = append(est.MV, v+0.4) // an offset, removed with the mean
		} else {
			est.MV = append(est.MV, math.NaN())
		}
	}
	s := CompareStrict(&ref, &est, 0, 10)
	if math.Abs(s.SNRdB-10*math.Log10(2)) > 0.05 {
		t.Fatalf("strict SNR %.3f dB, want 3.01", s.SNRdB)
	}
	if math.Abs(s.Coverage-0.5) > 0.01 {
		t.Fatalf("coverage %.3f, want 0.5", s.Coverage)
	}
	if c := Compare(&ref, &est, 0, 10); c.SNRdB < 60 {
		t.Fatalf("Compare skips blanks: %.1f dB", c.SNRdB)
	}
	if m := CompareStrict(&ref, nil, 0, 10); m.SNRdB != 0 {
		t.Fatalf("a missing lead scores %.2f dB, want 0", m.SNRdB)
	}
	// The shift is searched in whole 2 ms steps: an estimate 12 ms late
	// is found at 12 ms.
	late := Signal{Lead: II, RateHz: 500, StartS: 0.012, MV: ref.MV}
	if a := CompareStrict(&ref, &late, 0.5, 9.5); math.Abs(a.ShiftS-0.012) > 1e-9 || a.SNRdB < 40 {
		t.Fatalf("shift %.4f s, SNR %.1f dB", a.ShiftS, a.SNRdB)
	}
}

// AtIndex is linear interpolation between neighbouring samples (the
// textbook rule, common practice): NaN outside the samples and next to a
// gap, the last sample itself at its own index.
func TestAtIndex(t *testing.T) {
	s := &Signal{RateHz: 500, MV: []float64{0, 1, 4, math.NaN(), 2}}
	for _, c := range []struct{ x, want float64 }{
		{0, 0}, {0.5, 0.5}, {1.25, 1.75}, {2, 4}, {4, 2},
	} {
		if got := s.AtIndex(c.x); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("AtIndex(%g) = %g, want %g", c.x, got, c.want)
		}
	}
	for _, x := range []float64{-0.01, 2.5, 3, 3.5, 4.01, math.NaN()} {
		if got := s.AtIndex(x); !math.IsNaN(got) {
			t.Errorf("AtIndex(%g) = %g, want NaN", x, got)
		}
	}
}
