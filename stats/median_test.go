package stats

import (
	"math"
	"math/rand"
	"slices"
	"testing"

	"gonum.org/v1/gonum/stat"
)

// The median of an odd count is the middle value, of an even count the
// mean of the two middle values (NIST/SEMATECH e-Handbook of Statistical
// Methods, 1.3.5.1, "Measures of location"; from memory); nothing has
// none.
func TestMedianWorked(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name string
		x    []float64
		want float64
	}{
		{"one", []float64{7}, 7},
		{"odd", []float64{3, 1, 2}, 2},
		{"even", []float64{4, 1, 3, 2}, 2.5},
		{"ties", []float64{5, 5, 1, 5}, 5},
		{"negative", []float64{-1, -3}, -2},
	} {
		t.Run(c.name, func(t *testing.T) {
			x := slices.Clone(c.x)
			if got := Median(x); got != c.want {
				t.Errorf("Median(%v) = %v, want %v", c.x, got, c.want)
			}
			if !slices.Equal(x, c.x) {
				t.Errorf("Median changed its input: %v", x)
			}
			if got := MedianInPlace(x); got != c.want {
				t.Errorf("MedianInPlace(%v) = %v, want %v", c.x, got, c.want)
			}
		})
	}
	for _, empty := range [][]float64{nil, {}} {
		if !math.IsNaN(Median(empty)) || !math.IsNaN(MedianInPlace(empty)) {
			t.Error("the median of nothing is not NaN")
		}
		if m, d := MedianMAD(empty); !math.IsNaN(m) || !math.IsNaN(d) {
			t.Error("the median and MAD of nothing are not NaN")
		}
	}
	// MAD of 1, 1, 2, 2, 4, 6, 9: median 2, deviations 1 1 0 0 2 4 7, MAD 1
	// (the worked example of the median absolute deviation's usual
	// definition; from memory).
	if m, d := MedianMAD([]float64{1, 1, 2, 2, 4, 6, 9}); m != 2 || d != 1 {
		t.Errorf("MedianMAD = %v, %v, want 2, 1", m, d)
	}
}

// Both medians agree with gonum's empirical quantiles on random lengths
// with ties: the middle value for an odd count, the mean of the lower and
// the upper middle for an even one.
func TestMedianAgainstGonum(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewSource(1))
	for n := 1; n < 300; n++ {
		x := make([]float64, n)
		for i := range x {
			x[i] = float64(rng.Intn(23)) - 11 + 0.25*float64(rng.Intn(3))
		}
		s := slices.Clone(x)
		slices.Sort(s)
		want := stat.Quantile(0.5, stat.Empirical, s, nil)
		if n%2 == 0 {
			upper := stat.Quantile((float64(n/2)+0.5)/float64(n), stat.Empirical, s, nil)
			want = (want + upper) / 2
		}
		if got := Median(x); got != want {
			t.Fatalf("n=%d: Median %v, gonum %v", n, got, want)
		}
		if got := MedianInPlace(slices.Clone(x)); got != want {
			t.Fatalf("n=%d: MedianInPlace %v, gonum %v", n, got, want)
		}
	}
}

func BenchmarkMedian(b *testing.B) {
	x := make([]float64, 500)
	for i := range x {
		x[i] = float64((i * 7919) % 503)
	}
	y := make([]float64, len(x))
	b.Run("copy-sort", func(b *testing.B) {
		b.ReportAllocs()
		for range b.N {
			Median(x)
		}
	})
	b.Run("in-place-select", func(b *testing.B) {
		b.ReportAllocs()
		for range b.N {
			copy(y, x)
			MedianInPlace(y)
		}
	})
}
