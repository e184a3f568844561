package compare

import (
	"math"

	"tracelift/axis"
	"tracelift/record"
)

// gridHz is the rate of the beats compared here, the measurement engine's
// template rate.
const gridHz = 500.0

const gridMS = 1000 / gridHz

// waveSet is one beat's amplitudes (mV from the level just before the QRS
// onset) and Q duration (ms), measured as axis measures its representative
// beats: R the largest positive deflection within the QRS, Q the deepest
// negative one before it, S after it, ST at J+60 ms, T the largest
// deflection from J+60 ms to the T end.
type waveSet struct {
	q, qdur, r, s, st, t float64
	// neg is the deepest point of the QRS (Q or S, whichever R's place
	// makes it); tPos and tNeg the highest and lowest points of T.
	neg, tPos, tNeg float64
}

func nanWaves() waveSet {
	n := math.NaN()
	return waveSet{n, n, n, n, n, n, n, n, n}
}

// tPolarity reads T as +1 (upright: at least 0.1 mV up and its downward
// part under half of that), -1 (inverted, the mirror) or 0 (flat or
// biphasic), so that a biphasic T whose two halves trade places is not
// read as a new inversion (this package's rule; 0.1 mV as in Thresholds).
func (w waveSet) tPolarity() int {
	th := Thresholds[ItemT].Value
	switch {
	case w.tPos >= th && -w.tNeg < w.tPos/2:
		return 1
	case -w.tNeg >= th && w.tPos < -w.tNeg/2:
		return -1
	}
	return 0
}

// beatFid holds a beat's fiducials as indices into its samples.
type beatFid struct {
	on, off, tEnd int // tEnd < 0 when unknown
}

// qsR is the R below which a complex counts as QS for the Q duration
// (the Q then lasts until the deflection comes back to the baseline within
// the QRS): 0.05 mV, half a millimetre at 10 mm/mV, under what is read as
// an r wave on paper (this package's choice).
const qsR = 0.05

// measureWaves measures x (samples every gridMS ms) with fiducials fd.
func measureWaves(x []float64, fd beatFid) waveSet {
	w := nanWaves()
	on, off := fd.on, fd.off
	if on < 4 || off >= len(x) || off <= on {
		return w
	}
	// Baseline: the mean of the 8 ms up to the onset (as axis does).
	var base float64
	n := 0
	for k := on - 4; k <= on; k++ {
		if !math.IsNaN(x[k]) {
			base += x[k]
			n++
		}
	}
	if n == 0 {
		return w
	}
	base /= float64(n)
	ri, rv := -1, 0.0
	mn := math.Inf(1)
	for k := on; k <= off; k++ {
		v := x[k] - base
		if math.IsNaN(v) {
			continue
		}
		mn = math.Min(mn, v)
		if v > rv {
			ri, rv = k, v
		}
	}
	if math.IsInf(mn, 1) {
		return w
	}
	w.neg = math.Min(0, mn)
	end := off
	if ri < 0 {
		w.r, w.s = 0, 0
		w.q = math.Min(0, mn)
	} else {
		w.r = rv
		qv, sv := axis.QSAround(x, on, ri, off, base)
		w.q, w.s = qv, sv
		if rv >= qsR {
			end = ri
		}
	}
	// Q duration: from the onset to where the first negative deflection,
	// the one holding Q's deepest point before R (the whole QRS for a QS),
	// comes back to the baseline.
	w.qdur = 0
	if w.q < 0 {
		qi := -1
		for k := on; k <= end; k++ {
			if v := x[k] - base; !math.IsNaN(v) && v == w.q {
				qi = k
				break
			}
		}
		if qi >= 0 {
			k := qi
			for k <= end && !(x[k]-base >= 0) {
				k++
			}
			w.qdur = float64(k-on) * gridMS
		}
	}
	if j := off + int(math.Round(60/gridMS)); j < len(x) && !math.IsNaN(x[j]) {
		w.st = x[j] - base
	}
	if fd.tEnd > 0 {
		tv := 0.0
		seen := false
		w.tPos, w.tNeg = 0, 0
		for k := off + int(math.Round(60/gridMS)); k <= fd.tEnd && k < len(x); k++ {
			v := x[k] - base
			if math.IsNaN(v) {
				continue
			}
			seen = true
			w.tPos, w.tNeg = math.Max(w.tPos, v), math.Min(w.tNeg, v)
			if math.Abs(v) > math.Abs(tv) {
				tv = v
			}
		}
		if seen {
			w.t = tv
		} else {
			w.tPos, w.tNeg = math.NaN(), math.NaN()
		}
	}
	return w
}

// get returns the value of an amplitude item.
func (w waveSet) get(item string) float64 {
	switch item {
	case ItemQ:
		return w.q
	case ItemQDur:
		return w.qdur
	case ItemR:
		return w.r
	case ItemS:
		return w.s
	case ItemST:
		return w.st
	case ItemT:
		return w.t
	case itemNeg:
		return w.neg
	}
	return math.NaN()
}

// leadItems are the per-lead items, in the order they are listed.
var leadItems = []string{ItemQ, ItemQDur, ItemR, ItemS, ItemST, ItemT}

// itemNeg is the QRS's deepest point, kept to tell a Q read as an S (or
// the reverse, when a small R moves) from a change; it is not listed.
const itemNeg = "qrs_min_mv"

// templateFid returns the fiducials of f on a template whose R sits at
// index r0.
func templateFid(f *axis.Findings, r0 int) (beatFid, bool) {
	fd := f.Fiducials
	if !fd.QRSOn.OK() || !fd.QRSOff.OK() {
		return beatFid{}, false
	}
	out := beatFid{
		on:   r0 + int(math.Round(float64(fd.QRSOn)/gridMS)),
		off:  r0 + int(math.Round(float64(fd.QRSOff)/gridMS)),
		tEnd: -1,
	}
	if fd.TEnd.OK() {
		out.tEnd = r0 + int(math.Round(float64(fd.TEnd)/gridMS))
	}
	return out, true
}

// template returns lead's representative beat of f on the gridHz grid and
// the index of its R fiducial, nil when there is none.
func template(f *axis.Findings, lead string) ([]float64, int) {
	for _, t := range f.Templates {
		if t.Lead != lead || len(t.MV) == 0 {
			continue
		}
		if t.RateHz == gridHz {
			return t.MV, int(math.Round(-t.T0S * gridHz))
		}
		s := record.Signal{Lead: lead, RateHz: t.RateHz, StartS: t.T0S, MV: t.MV}
		r := s.Resample(gridHz)
		return r.MV, int(math.Round(-r.StartS * gridHz))
	}
	return nil, 0
}

// cut samples s on the gridHz grid over n samples from time t0 (seconds on
// the record's clock) by linear interpolation, NaN outside.
func cut(s *record.Signal, t0 float64, n int) []float64 {
	out := make([]float64, n)
	for k := range out {
		x := (t0 + float64(k)/gridHz - s.StartS) * s.RateHz
		i := int(math.Floor(x))
		out[k] = math.NaN()
		if i >= 0 && i+1 < len(s.MV) {
			f := x - float64(i)
			out[k] = s.MV[i]*(1-f) + s.MV[i+1]*f
		}
	}
	return out
}

// beatWaves measures every dominant beat of f in lead s with f's global
// fiducials; a beat the lead does not hold whole is skipped.
func beatWaves(f *axis.Findings, s *record.Signal) []waveSet {
	fd := f.Fiducials
	if !fd.QRSOn.OK() || !fd.QRSOff.OK() {
		return nil
	}
	pre := 20.0 // ms before the QRS onset
	post := float64(fd.QRSOff) + 80
	if fd.TEnd.OK() {
		post = math.Max(post, float64(fd.TEnd)+10)
	}
	span := post - float64(fd.QRSOn) + pre
	n := int(math.Round(span/gridMS)) + 1
	bf := beatFid{on: int(math.Round(pre / gridMS))}
	bf.off = bf.on + int(math.Round(float64(fd.QRSOff-fd.QRSOn)/gridMS))
	bf.tEnd = -1
	if fd.TEnd.OK() {
		bf.tEnd = bf.on + int(math.Round(float64(fd.TEnd-fd.QRSOn)/gridMS))
	}
	var out []waveSet
	for _, b := range f.Beats {
		if b.Class != "dominant" {
			continue
		}
		t0 := b.TS + (float64(fd.QRSOn)-pre)/1000
		if t0 < s.StartS || t0+span/1000 > s.EndS() {
			continue
		}
		x := cut(s, t0, n)
		miss := 0
		for _, v := range x {
			if math.IsNaN(v) {
				miss++
			}
		}
		if miss*5 > n {
			continue
		}
		w := measureWaves(x, bf)
		if !math.IsNaN(w.r) {
			out = append(out, w)
		}
	}
	return out
}

// spread90 returns the half-width of a 90 % interval of the median of the
// beats' values of item, or NaN when fewer than three beats hold it.
func spread90(ws []waveSet, item string) float64 {
	var v []float64
	for _, w := range ws {
		if x := w.get(item); !math.IsNaN(x) {
			v = append(v, x)
		}
	}
	if len(v) < 3 {
		return math.NaN()
	}
	var m, ss float64
	for _, x := range v {
		m += x
	}
	m /= float64(len(v))
	for _, x := range v {
		ss += (x - m) * (x - m)
	}
	sd := math.Sqrt(ss / float64(len(v)-1))
	return z90 * medianSE * sd / math.Sqrt(float64(len(v)))
}
