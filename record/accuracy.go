package record

import "math"

// Accuracy compares a digitized lead with the signal that was drawn.
type Accuracy struct {
	Lead     string  `json:"lead"`
	SNRdB    float64 `json:"snr_db"`   // 10·log10(Σref²/Σ(ref−est)²), means removed
	R        float64 `json:"r"`        // Pearson correlation
	RMSEuV   float64 `json:"rmse_uv"`  // root-mean-square error in µV
	ShiftS   float64 `json:"shift_s"`  // best time shift applied to est
	Coverage float64 `json:"coverage"` // fraction of the window where est has a value
	N        int     `json:"n"`        // samples compared
}

// MaxShiftS is the largest time shift searched when aligning an estimate
// to its reference (±40 ms).
const MaxShiftS = 0.040

// Compare scores est against ref over the window [t0, t1) on the common
// clock. Both are sampled onto ref's grid; est gaps are skipped (and
// lower Coverage). Each signal's mean over the compared samples is removed
// before the SNR, so a constant baseline offset does not count as error.
// The shift of est within ±MaxShiftS that maximises the SNR is used.
func Compare(ref, est *Signal, t0, t1 float64) Accuracy {
	a := Accuracy{Lead: ref.Lead, SNRdB: math.Inf(-1)}
	if ref == nil || est == nil || ref.RateHz <= 0 || est.RateHz <= 0 {
		return a
	}
	dt := 1 / ref.RateHz
	i0 := int(math.Ceil((t0 - ref.StartS) * ref.RateHz))
	i1 := int(math.Floor((t1 - ref.StartS) * ref.RateHz))
	if i0 < 0 {
		i0 = 0
	}
	if i1 > len(ref.MV) {
		i1 = len(ref.MV)
	}
	if i1-i0 < 2 {
		return a
	}
	step := 1 / math.Max(ref.RateHz, est.RateHz)
	nShift := int(math.Round(MaxShiftS / step))
	r := make([]float64, 0, i1-i0)
	e := make([]float64, 0, i1-i0)
	try := func(shift float64, best Accuracy) Accuracy {
		r, e = r[:0], e[:0]
		for i := i0; i < i1; i++ {
			t := ref.StartS + float64(i)*dt
			rv := ref.MV[i]
			ev := interp(est, t+shift)
			if math.IsNaN(rv) || math.IsNaN(ev) {
				continue
			}
			r = append(r, rv)
			e = append(e, ev)
		}
		if len(r) < 2 {
			return best
		}
		cur := score(r, e)
		cur.Lead = ref.Lead
		cur.ShiftS = shift
		cur.Coverage = float64(len(r)) / float64(i1-i0)
		// Prefer coverage first (a shift must not win by dropping samples),
		// then SNR.
		if cur.SNRdB > best.SNRdB && cur.Coverage >= best.Coverage-0.02 {
			return cur
		}
		return best
	}
	best := a
	for k := -nShift; k <= nShift; k++ {
		best = try(float64(k)*step, best)
	}
	// Refine to a tenth of a sample around the best whole-sample shift, so
	// that a sub-sample offset of the time axis is not scored as
	// amplitude error.
	if !math.IsInf(best.SNRdB, -1) {
		c := best.ShiftS
		for k := -9; k <= 9; k++ {
			if s := c + float64(k)*step/10; math.Abs(s) <= MaxShiftS {
				best = try(s, best)
			}
		}
	}
	return best
}

func interp(s *Signal, t float64) float64 {
	return s.AtIndex((t - s.StartS) * s.RateHz)
}

func score(r, e []float64) Accuracy {
	n := float64(len(r))
	var mr, me float64
	for i := range r {
		mr += r[i]
		me += e[i]
	}
	mr /= n
	me /= n
	var srr, see, sre, sd float64
	for i := range r {
		dr, de := r[i]-mr, e[i]-me
		srr += dr * dr
		see += de * de
		sre += dr * de
		d := dr - de
		sd += d * d
	}
	return fromSums(srr, see, sre, sd, len(r))
}

// fromSums turns the de-meaned sums Σref², Σest², Σref·est and
// Σ(ref−est)² over n samples into the SNR, Pearson r and RMSE.
func fromSums(srr, see, sre, sd float64, n int) Accuracy {
	a := Accuracy{N: n}
	switch {
	case sd == 0:
		a.SNRdB = math.Inf(1)
	case srr == 0:
		a.SNRdB = math.Inf(-1)
	default:
		a.SNRdB = 10 * math.Log10(srr/sd)
	}
	if srr > 0 && see > 0 {
		a.R = sre / math.Sqrt(srr*see)
	}
	a.RMSEuV = 1000 * math.Sqrt(sd/float64(n))
	return a
}

// StrictShiftStepS is the step of the shift search in CompareStrict (2 ms).
const StrictShiftStepS = 0.002

// CompareStrict scores est against ref as a user meets the result: over
// the window [t0, t1) on ref's grid, est interpolated linearly, both
// de-meaned, and every grid sample est leaves blank (a gap, or outside
// est) counted as error with the de-meaned estimate taken as 0 there. The
// shift of est within ±MaxShiftS, searched in whole StrictShiftStepS steps
// with no refinement, that maximises the SNR is used. A nil est scores
// 0 dB (every sample an error of the reference's own size).
//
// Compare skips blanks instead (they lower only its Coverage) and refines
// the shift to a tenth of a sample, which reads higher on pages with holes.
func CompareStrict(ref, est *Signal, t0, t1 float64) Accuracy {
	a := Accuracy{SNRdB: math.Inf(-1)}
	if ref == nil || ref.RateHz <= 0 {
		return a
	}
	a.Lead = ref.Lead
	i0 := int(math.Ceil((t0 - ref.StartS) * ref.RateHz))
	i1 := int(math.Floor((t1 - ref.StartS) * ref.RateHz))
	if i0 < 0 {
		i0 = 0
	}
	if i1 > len(ref.MV) {
		i1 = len(ref.MV)
	}
	var r []float64
	var times []float64
	for i := i0; i < i1; i++ {
		if math.IsNaN(ref.MV[i]) {
			continue
		}
		r = append(r, ref.MV[i])
		times = append(times, ref.StartS+float64(i)/ref.RateHz)
	}
	if len(r) < 2 {
		return a
	}
	var mr float64
	for _, v := range r {
		mr += v
	}
	mr /= float64(len(r))
	var srr float64
	for i := range r {
		r[i] -= mr
		srr += r[i] * r[i]
	}
	n := len(r)
	if est == nil || est.RateHz <= 0 || len(est.MV) == 0 {
		a.SNRdB, a.N = 0, n
		a.RMSEuV = 1000 * math.Sqrt(srr/float64(n))
		return a
	}
	e := make([]float64, n)
	have := make([]bool, n)
	nShift := int(math.Round(MaxShiftS / StrictShiftStepS))
	best := a
	for k := -nShift; k <= nShift; k++ {
		shift := float64(k) * StrictShiftStepS
		var me float64
		m := 0
		for i, t := range times {
			v := interp(est, t+shift)
			have[i] = !math.IsNaN(v)
			if have[i] {
				e[i] = v
				me += v
				m++
			}
		}
		if m > 0 {
			me /= float64(m)
		}
		var see, sre, sd float64
		for i := range r {
			de := 0.0
			if have[i] {
				de = e[i] - me
			}
			see += de * de
			sre += r[i] * de
			d := r[i] - de
			sd += d * d
		}
		cur := fromSums(srr, see, sre, sd, n)
		cur.Lead, cur.ShiftS, cur.Coverage = ref.Lead, shift, float64(m)/float64(n)
		if cur.SNRdB > best.SNRdB {
			best = cur
		}
	}
	return best
}

// CompareRecordStrict scores every lead of truth that est should hold,
// each over truth's own window, by CompareStrict; a lead est lacks (or a
// nil est) scores 0 dB, as a lead not recovered counts for a user. The
// result follows truth's lead order.
func CompareRecordStrict(truth, est *Record) []Accuracy {
	var out []Accuracy
	for i := range truth.Signals {
		ref := &truth.Signals[i]
		var e *Signal
		if est != nil {
			e = est.Lead(ref.Lead)
		}
		out = append(out, CompareStrict(ref, e, ref.StartS, ref.EndS()))
	}
	return out
}
