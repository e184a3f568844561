package axis

import (
	"math"

	"tracelift/record"
	"tracelift/stats"
)

// tplHz is the rate of the representative beats: every lead is brought to
// this common grid so leads of different rates line up sample by sample.
const tplHz = 500.0

// maxTemplateBeats bounds the beats that enter a median (evenly chosen),
// so a 30 min record costs no more than a few minutes' worth.
const maxTemplateBeats = 120

// window is the span of a representative beat around the R fiducial.
type window struct {
	pre, post float64 // seconds before and after R
	r0, n     int     // index of R and number of samples on the tplHz grid
}

// beatWindow sizes the representative beat from the median RR: long
// enough for a P onset before and a T end after, short enough not to reach
// the neighbouring beats.
func beatWindow(rr float64) window {
	if !(rr > 0) {
		rr = 1
	}
	pre := math.Min(0.40, math.Max(0.22, 0.45*rr))
	post := math.Min(0.70, math.Max(0.32, 0.68*rr))
	r0 := int(math.Round(pre * tplHz))
	return window{pre: pre, post: post, r0: r0, n: r0 + int(math.Round(post*tplHz)) + 1}
}

// detrend returns the lead with a baseline removed: a line through knots
// placed, for each beat, at the median level of the stretch
// [t+k0, t+k1] seconds from its R fiducial (the PR segment). Samples stay
// NaN where the lead is a gap.
func detrend(s *record.Signal, beats []float64, k0, k1 float64) []float64 {
	out := make([]float64, len(s.MV))
	var kt, kv []float64
	buf := make([]float64, 0, 64)
	for _, t := range beats {
		i0 := int(math.Ceil((t + k0 - s.StartS) * s.RateHz))
		i1 := int(math.Floor((t + k1 - s.StartS) * s.RateHz))
		if i0 < 0 || i1 >= len(s.MV) || i1 < i0 {
			continue
		}
		buf = buf[:0]
		for _, v := range s.MV[i0 : i1+1] {
			if !math.IsNaN(v) {
				buf = append(buf, v)
			}
		}
		if len(buf) < (i1-i0+1)/2+1 {
			continue
		}
		kt = append(kt, t+(k0+k1)/2)
		kv = append(kv, stats.MedianInPlace(buf))
	}
	if len(kt) == 0 {
		buf = buf[:0]
		for _, v := range s.MV {
			if !math.IsNaN(v) {
				buf = append(buf, v)
			}
		}
		m := 0.0
		if len(buf) > 0 {
			m = stats.MedianInPlace(buf)
		}
		for i, v := range s.MV {
			out[i] = v - m
		}
		return out
	}
	j := 0
	for i, v := range s.MV {
		if math.IsNaN(v) {
			out[i] = v
			continue
		}
		t := s.StartS + float64(i)/s.RateHz
		for j < len(kt)-1 && kt[j+1] <= t {
			j++
		}
		var b float64
		switch {
		case t <= kt[0]:
			b = kv[0]
		case j >= len(kt)-1:
			b = kv[len(kv)-1]
		default:
			f := (t - kt[j]) / (kt[j+1] - kt[j])
			b = kv[j]*(1-f) + kv[j+1]*f
		}
		out[i] = v - b
	}
	return out
}

// segment copies the beat at R time t from the detrended samples y (of
// signal s) onto the template grid by linear interpolation. It returns nil
// when the QRS part (±80 ms) is not fully recorded or more than 20 % of the
// window is missing.
func segment(dst []float64, y []float64, s *record.Signal, t float64, w window) []float64 {
	if dst == nil {
		dst = make([]float64, w.n)
	}
	miss := 0
	q := int(0.080 * tplHz)
	ys := record.Signal{StartS: s.StartS, RateHz: s.RateHz, MV: y}
	for k := range w.n {
		tk := t + float64(k-w.r0)/tplHz
		v := ys.AtIndex((tk - s.StartS) * s.RateHz)
		if math.IsNaN(v) {
			miss++
			if k >= w.r0-q && k <= w.r0+q {
				return nil
			}
		}
		dst[k] = v
	}
	if miss*5 > w.n {
		return nil
	}
	return dst
}

// medianBeat returns the sample-by-sample median of the segments,
// ignoring NaN.
func medianBeat(segs [][]float64, n int) []float64 {
	out := make([]float64, n)
	col := make([]float64, 0, len(segs))
	for k := range n {
		col = col[:0]
		for _, s := range segs {
			if v := s[k]; !math.IsNaN(v) {
				col = append(col, v)
			}
		}
		if len(col) == 0 {
			out[k] = math.NaN()
			continue
		}
		out[k] = stats.MedianInPlace(col)
	}
	return out
}

// corrShift finds the shift (in grid samples, within ±maxShift) that best
// lines seg up with tpl over [lo, hi), and the correlation there.
func corrShift(tpl, seg []float64, lo, hi, maxShift int) (int, float64) {
	best, bestR := 0, math.Inf(-1)
	for sh := -maxShift; sh <= maxShift; sh++ {
		var sx, sy, sxx, syy, sxy float64
		cnt := 0
		for k := lo; k < hi; k++ {
			j := k + sh
			if j < 0 || j >= len(seg) {
				continue
			}
			a, b := tpl[k], seg[j]
			if math.IsNaN(a) || math.IsNaN(b) {
				continue
			}
			sx += a
			sy += b
			sxx += a * a
			syy += b * b
			sxy += a * b
			cnt++
		}
		if cnt < (hi-lo)/2 {
			continue
		}
		c := float64(cnt)
		den := math.Sqrt((sxx - sx*sx/c) * (syy - sy*sy/c))
		r := 0.0
		if den > 0 {
			r = (sxy - sx*sy/c) / den
		}
		if r > bestR {
			best, bestR = sh, r
		}
	}
	if math.IsInf(bestR, -1) {
		return 0, 0
	}
	return best, bestR
}

// evenly picks at most m indices of 0..n-1, evenly spread.
func evenly(n, m int) []int {
	out := make([]int, 0, min(n, m))
	if n <= m {
		for i := range n {
			out = append(out, i)
		}
		return out
	}
	for k := range m {
		out = append(out, k*n/m)
	}
	return out
}
