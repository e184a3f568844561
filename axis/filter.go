package axis

import "math"

// biquad is a second-order IIR section in direct form I.
type biquad struct{ b0, b1, b2, a1, a2 float64 }

// butter2 designs a second-order Butterworth low-pass (high=false) or
// high-pass (high=true) section at cut-off fc for sampling rate fs, by the
// bilinear transform with pre-warping (the standard analogue-prototype
// design; coefficients as in R. Bristow-Johnson's audio filter cookbook
// with Q = 1/√2).
func butter2(fc, fs float64, high bool) biquad {
	if fc >= 0.45*fs {
		fc = 0.45 * fs
	}
	w := 2 * math.Pi * fc / fs
	cw, sw := math.Cos(w), math.Sin(w)
	alpha := sw / (2 / math.Sqrt2) // sin(w)/(2Q), Q = 1/√2
	a0 := 1 + alpha
	var q biquad
	if high {
		q.b0 = (1 + cw) / 2 / a0
		q.b1 = -(1 + cw) / a0
		q.b2 = (1 + cw) / 2 / a0
	} else {
		q.b0 = (1 - cw) / 2 / a0
		q.b1 = (1 - cw) / a0
		q.b2 = (1 - cw) / 2 / a0
	}
	q.a1 = -2 * cw / a0
	q.a2 = (1 - alpha) / a0
	return q
}

// run filters x in place, starting from a state at rest on x[0] (so a
// signal that starts away from zero does not ring).
func (q biquad) run(x []float64) {
	if len(x) == 0 {
		return
	}
	// Steady state for a constant input x0: y0 = H(1)·x0.
	x0 := x[0]
	g := (q.b0 + q.b1 + q.b2) / (1 + q.a1 + q.a2)
	x1, x2 := x0, x0
	y1, y2 := g*x0, g*x0
	for i, v := range x {
		y := q.b0*v + q.b1*x1 + q.b2*x2 - q.a1*y1 - q.a2*y2
		x2, x1 = x1, v
		y2, y1 = y1, y
		x[i] = y
	}
}

// filtfilt applies q forward then backward (zero phase, squared
// magnitude response). x must hold no NaN.
func (q biquad) filtfilt(x []float64) {
	q.run(x)
	reverse(x)
	q.run(x)
	reverse(x)
}

func reverse(x []float64) {
	for i, j := 0, len(x)-1; i < j; i, j = i+1, j-1 {
		x[i], x[j] = x[j], x[i]
	}
}

// movingAverage returns the centred moving average of x over w samples
// (w ≥ 1), shrinking the window at the ends.
func movingAverage(dst, x []float64, w int) []float64 {
	n := len(x)
	if dst == nil {
		dst = make([]float64, n)
	}
	if w < 1 {
		w = 1
	}
	h := w / 2
	pre := make([]float64, n+1)
	for i, v := range x {
		pre[i+1] = pre[i] + v
	}
	for i := range n {
		lo, hi := i-h, i-h+w
		if lo < 0 {
			lo = 0
		}
		if hi > n {
			hi = n
		}
		dst[i] = (pre[hi] - pre[lo]) / float64(hi-lo)
	}
	return dst
}

// runs returns the [start,end) index ranges of x free of NaN that are at
// least minLen samples long.
func runs(x []float64, minLen int) [][2]int {
	var out [][2]int
	start := -1
	for i, v := range x {
		if math.IsNaN(v) {
			if start >= 0 && i-start >= minLen {
				out = append(out, [2]int{start, i})
			}
			start = -1
			continue
		}
		if start < 0 {
			start = i
		}
	}
	if start >= 0 && len(x)-start >= minLen {
		out = append(out, [2]int{start, len(x)})
	}
	return out
}
