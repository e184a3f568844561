package axis

import "math"

// fid holds wave boundaries as fractional indices on the template grid;
// NaN when a wave was not found.
type fid struct {
	pOn, pPeak, pOff float64
	on, off          float64
	tPeak, tEnd      float64
}

// Thresholds of the delineator, as fractions. They are this package's
// choices, tuned on synthetic dipole beats and checked for plausibility on
// the PTB record; sensitivity runs scale them to estimate how much the
// boundaries depend on them.
const (
	qrsVelFrac = 0.08  // QRS boundary: spatial velocity below this share of its peak
	quietMS    = 14.0  // ... for at least this long (turning points inside the QRS are shorter)
	pMagFrac   = 0.08  // P boundary: magnitude back to this share above its floor
	minPMV     = 0.02  // RMS P magnitude below this: no P wave (mV)
	minTMV     = 0.025 // RMS T magnitude below this: no T wave (mV)
)

// delineate places the global fiducials on the representative beats tp
// (one per lead, same grid, R at r0), weighting lead l by w[l]. scale
// multiplies the thresholds (1 = nominal).
func delineate(tp [][]float64, w []float64, r0 int, scale float64) fid {
	f := fid{pOn: math.NaN(), pPeak: math.NaN(), pOff: math.NaN(), on: math.NaN(), off: math.NaN(), tPeak: math.NaN(), tEnd: math.NaN()}
	if len(tp) == 0 {
		return f
	}
	n := len(tp[0])
	ms := func(x float64) int { return int(math.Round(x * tplHz / 1000)) }
	// Smoothed copies (10 ms moving average) for the velocity.
	sm := make([][]float64, len(tp))
	for l, x := range tp {
		c := make([]float64, n)
		for k, v := range x {
			if math.IsNaN(v) {
				v = 0
			}
			c[k] = v
		}
		sm[l] = movingAverage(nil, c, ms(10)|1)
	}
	var wsum float64
	for _, v := range w {
		wsum += v
	}
	if wsum <= 0 {
		return f
	}
	vel := make([]float64, n)
	for k := 1; k < n-1; k++ {
		var s float64
		for l := range sm {
			if math.IsNaN(tp[l][k]) {
				continue
			}
			d := (sm[l][k+1] - sm[l][k-1]) / 2
			s += w[l] * d * d
		}
		vel[k] = math.Sqrt(s / wsum)
	}
	lo, hi := max(1, r0-ms(80)), min(n-2, r0+ms(80))
	vmax, kmax := 0.0, r0
	for k := lo; k <= hi; k++ {
		if vel[k] > vmax {
			vmax, kmax = vel[k], k
		}
	}
	if vmax <= 0 {
		return f
	}
	thr := qrsVelFrac * scale * vmax
	quiet := ms(quietMS)
	// Onset: walking left from the steepest point, the right end of the
	// first stretch of quiet samples at least `quiet` long.
	limLo := max(1, r0-ms(200))
	on := math.NaN()
	for k, run := kmax, 0; k >= limLo; k-- {
		if vel[k] < thr {
			run++
			if run >= quiet {
				on = float64(k + run - 1)
				break
			}
		} else {
			run = 0
		}
	}
	if math.IsNaN(on) {
		on = float64(argMin(vel, limLo, kmax))
	}
	limHi := min(n-2, r0+ms(220))
	off := math.NaN()
	for k, run := kmax, 0; k <= limHi; k++ {
		if vel[k] < thr {
			run++
			if run >= quiet {
				off = float64(k - run + 1)
				break
			}
		} else {
			run = 0
		}
	}
	if math.IsNaN(off) {
		off = float64(argMin(vel, kmax, limHi))
	}
	f.on, f.off = on, off
	ion, ioff := int(on), int(off)

	// Per-lead baseline: the level just before the QRS onset.
	base := make([]float64, len(tp))
	for l := range tp {
		base[l] = meanFinite(tp[l], max(0, ion-ms(8)), ion+1)
	}
	mag := func(k int, b []float64) float64 {
		var s float64
		for l := range tp {
			v := tp[l][k]
			if math.IsNaN(v) || math.IsNaN(b[l]) {
				continue
			}
			d := v - b[l]
			s += w[l] * d * d
		}
		return math.Sqrt(s / wsum)
	}
	dev := make([]float64, n)
	for k := range n {
		dev[k] = mag(k, base)
	}
	dsm := movingAverage(nil, dev, ms(20)|1)

	// P wave: the largest magnitude between the window start and the onset.
	pa, pb := ms(10), ion-ms(20)
	if pb-pa > ms(40) {
		kp := argMax(dsm, pa, pb)
		floorL := dsm[argMin(dsm, pa, kp)]
		floorR := dsm[argMin(dsm, kp, ion)]
		if dsm[kp] >= minPMV*scale && dsm[kp]-floorL >= minPMV*scale && dsm[kp]-floorR >= minPMV*scale*0.5 && kp > pa {
			tl := floorL + pMagFrac*scale*(dsm[kp]-floorL)
			tr := floorR + pMagFrac*scale*(dsm[kp]-floorR)
			k0 := kp
			for k0 > pa && dsm[k0] > tl {
				k0--
			}
			k1 := kp
			for k1 < ion && dsm[k1] > tr {
				k1++
			}
			if k0 > pa { // an onset inside the window, not cut by its start
				f.pOn, f.pPeak, f.pOff = float64(k0), float64(kp), float64(k1)
			}
		}
	}

	// T wave: the largest magnitude from 60 ms after the QRS offset to the
	// end; its end by the tangent method (the steepest descent of the
	// magnitude extended to its floor).
	ta, tb := ioff+ms(60), n-ms(10)
	if tb-ta > ms(60) {
		kt := argMax(dsm, ta, tb)
		fl := dsm[argMin(dsm, kt, n)]
		if dsm[kt]-fl >= minTMV*scale {
			ks, slope := kt, 0.0
			for k := kt + 1; k < n-1; k++ {
				d := (dsm[k+1] - dsm[k-1]) / 2
				if d < slope {
					ks, slope = k, d
				}
			}
			if slope < 0 {
				te := float64(ks) + (dsm[ks]-fl)/(-slope)
				f.tPeak, f.tEnd = float64(kt), math.Min(te, float64(n-1))
			}
		}
	}
	return f
}

func argMax(x []float64, lo, hi int) int {
	best := lo
	for k := lo; k < hi && k < len(x); k++ {
		if x[k] > x[best] {
			best = k
		}
	}
	return best
}

func argMin(x []float64, lo, hi int) int {
	best := lo
	for k := lo; k < hi && k < len(x); k++ {
		if x[k] < x[best] {
			best = k
		}
	}
	return best
}

func meanFinite(x []float64, lo, hi int) float64 {
	var s float64
	c := 0
	for k := max(0, lo); k < hi && k < len(x); k++ {
		if !math.IsNaN(x[k]) {
			s += x[k]
			c++
		}
	}
	if c == 0 {
		return math.NaN()
	}
	return s / float64(c)
}
