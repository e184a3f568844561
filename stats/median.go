// Package stats holds the small order statistics every stage needs, with
// one rule for empty input: a median of nothing is NaN. It imports only
// the standard library, so that calib, digitize, axis and the faces can
// all share it.
//
// gonum's stat.Quantile is not used for the median: none of its
// cumulative kinds gives the mean of the two middle values for an even
// count (Empirical and LinInterp give the lower middle), which is the
// median the stages were tuned with.
package stats

import (
	"math"
	"sort"
)

// Median returns the median of x, the mean of the two middle values for
// an even count, and NaN for an empty x. x is not changed. NaN values sort
// first (sort.Float64s); x should hold none.
func Median(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), x...)
	sort.Float64s(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

// MedianInPlace returns the same value as Median and reorders x to find
// it, without a copy: for short x by sorting, for longer x by selection
// in linear time (the measurement engine takes the median of every
// sample column of its beats). x must hold no NaN.
func MedianInPlace(x []float64) float64 {
	n := len(x)
	if n == 0 {
		return math.NaN()
	}
	if n <= 12 {
		sort.Float64s(x)
	} else {
		selectK(x, n/2)
		if n%2 == 1 {
			return x[n/2]
		}
		// The lower middle is the largest of the left part.
		lo := x[0]
		for _, v := range x[1 : n/2] {
			lo = math.Max(lo, v)
		}
		return (lo + x[n/2]) / 2
	}
	m := n / 2
	if n%2 == 1 {
		return x[m]
	}
	return (x[m-1] + x[m]) / 2
}

// MedianMAD returns the median of x and the median absolute deviation
// from it; NaN for both when x is empty.
func MedianMAD(x []float64) (med, mad float64) {
	med = Median(x)
	d := make([]float64, len(x))
	for i, v := range x {
		d[i] = math.Abs(v - med)
	}
	return med, Median(d)
}

// selectK reorders x so that x[k] is the k-th smallest, everything before
// it no larger and everything after no smaller (Hoare's selection with a
// median-of-three pivot).
func selectK(x []float64, k int) {
	lo, hi := 0, len(x)-1
	for hi > lo {
		mid := lo + (hi-lo)/2
		if x[mid] < x[lo] {
			x[mid], x[lo] = x[lo], x[mid]
		}
		if x[hi] < x[lo] {
			x[hi], x[lo] = x[lo], x[hi]
		}
		if x[hi] < x[mid] {
			x[hi], x[mid] = x[mid], x[hi]
		}
		p := x[mid]
		i, j := lo, hi
		for i <= j {
			for x[i] < p {
				i++
			}
			for x[j] > p {
				j--
			}
			if i <= j {
				x[i], x[j] = x[j], x[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return
		}
	}
}
