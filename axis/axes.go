package axis

import (
	"math"

	"tracelift/record"
)

// wave names a deflection whose frontal axis is measured.
type wave int

const (
	waveQRS wave = iota
	waveP
	waveT
)

// span returns the grid range and the baseline index of a wave, ok false
// when the wave was not found.
func (fd fid) span(w wave) (from, to, base int, ok bool) {
	switch w {
	case waveQRS:
		return int(fd.on), int(math.Ceil(fd.off)), int(fd.on), !math.IsNaN(fd.on) && !math.IsNaN(fd.off)
	case waveP:
		return int(fd.pOn), int(math.Ceil(fd.pOff)), int(fd.pOn), !math.IsNaN(fd.pOn)
	default:
		return int(math.Ceil(fd.off)), int(fd.tEnd), int(fd.on), !math.IsNaN(fd.tEnd)
	}
}

// waveArea integrates x over [from, to] from the level at base (mean of
// the 8 ms before it), in mV·ms.
func waveArea(x []float64, from, to, base int) float64 {
	b := meanFinite(x, base-int(0.008*tplHz), base+1)
	if math.IsNaN(b) || to >= len(x) || from < 0 {
		return math.NaN()
	}
	var a float64
	for k := from; k <= to; k++ {
		if !math.IsNaN(x[k]) {
			a += (x[k] - b) * 1000 / tplHz
		}
	}
	return a
}

// limbIndex maps the limb leads present (with templates) to rec.Signals.
func (m *measurer) limbIndex() map[string]int {
	out := map[string]int{}
	for si, t := range m.tpl {
		if t == nil {
			continue
		}
		if l := m.rec.Signals[si].Lead; isLimb(l) {
			out[l] = si
		}
	}
	return out
}

// axisOf computes one wave's axis by the three methods and the
// least-squares value's uncertainty (degrees).
func (m *measurer) axisOf(w wave) (lsq, sd float64, methods [3]AxisMethod) {
	lsq, sd = math.NaN(), math.NaN()
	names := [3]string{"least_squares", "quadrant", "isoelectric"}
	for i := range methods {
		methods[i] = AxisMethod{Method: names[i], QRSDeg: NaN(), PDeg: NaN(), TDeg: NaN(), Classical: NaN()}
	}
	from, to, base, ok := m.fid.span(w)
	if !ok {
		return
	}
	idx := m.limbIndex()
	net := map[string]float64{}
	for l, si := range idx {
		if v := waveArea(m.tpl[si], from, to, base); !math.IsNaN(v) {
			net[l] = v
		}
	}
	vals := [3]float64{math.NaN(), math.NaN(), math.NaN()}
	var dets [3]string
	var classical float64 = math.NaN()
	vals[0], dets[0], _ = axisLSQ(net)
	vals[1], dets[1], _ = axisQuadrant(net)
	vals[2], classical, dets[2], _ = axisIsoelectric(net)
	for i := range methods {
		methods[i].Detail = dets[i]
		v := Num(vals[i])
		switch w {
		case waveQRS:
			methods[i].QRSDeg = v
		case waveP:
			methods[i].PDeg = v
		default:
			methods[i].TDeg = v
		}
	}
	if w == waveQRS {
		methods[2].Classical = Num(classical)
	}
	lsq = vals[0]
	if math.IsNaN(lsq) {
		return
	}
	proj := projections(net)
	x, y, mm, _ := lsqFit(proj)

	// Beat-to-beat spread: per-beat angles where every lead of the fit
	// holds the beat (simultaneous limb leads), else the per-lead area
	// spread propagated through the fit.
	var angles []float64
	perLead := map[string][]float64{}
	for bi := range m.beats {
		if !m.dominant(bi) {
			continue
		}
		bn := map[string]float64{}
		for l := range net {
			sg := m.segs[idx[l]][bi]
			if sg == nil {
				continue
			}
			if v := waveArea(sg, from, to, base); !math.IsNaN(v) {
				bn[l] = v
				perLead[l] = append(perLead[l], v)
			}
		}
		if len(bn) == len(net) {
			if a, _, ok := axisLSQ(bn); ok {
				angles = append(angles, a)
			}
		}
	}
	beatSD, nb := 0.0, len(angles)
	if len(angles) >= 3 {
		beatSD = circSD(angles)
	} else {
		for _, v := range perLead {
			nb = max(nb, len(v))
		}
		sds := map[string]float64{}
		for l, v := range perLead {
			if _, s := meanSD(v); !math.IsNaN(s) {
				sds[l] = s
			}
		}
		beatSD = lsqAngleSD(x, y, mm, sds)
	}
	// Digitization quality: a lead of confidence q is given an area error
	// of (1−q)·20 % of the RMS limb-lead area (this package's allowance).
	var rms float64
	for _, v := range net {
		rms += v * v
	}
	rms = math.Sqrt(rms / float64(len(net)))
	qsd := map[string]float64{}
	for l := range net {
		qsd[l] = (1 - m.qual(l)) * 0.2 * rms
	}
	qualSD := lsqAngleSD(x, y, mm, qsd)
	sd = math.Min(180, math.Hypot(beatSD, qualSD))
	if m.spread == nil {
		m.spread = map[string]float64{}
	}
	m.spread[[3]string{"qrs_deg", "p_deg", "t_deg"}[w]] = math.Min(180, beatSD/math.Sqrt(math.Max(1, float64(nb))))
	return lsq, sd, methods
}

func (m *measurer) axes(f *Findings) {
	q, qsd, mq := m.axisOf(waveQRS)
	p, psd, mp := m.axisOf(waveP)
	t, tsd, mt := m.axisOf(waveT)
	ax := Axes{QRSDeg: Num(q), PDeg: Num(p), TDeg: Num(t), QRSDegSD: Num(qsd), PDegSD: Num(psd), TDegSD: Num(tsd), Spread: NaN()}
	ax.QRSCategory = Category(q)
	for i := range mq {
		mq[i].PDeg, mq[i].TDeg = mp[i].PDeg, mt[i].TDeg
		if mp[i].Detail != mq[i].Detail && mp[i].PDeg.OK() {
			mq[i].Detail += "; P: " + mp[i].Detail
		}
		ax.Methods = append(ax.Methods, mq[i])
	}
	var spread float64
	n := 0
	for i := range mq {
		for j := i + 1; j < len(mq); j++ {
			a, b := mq[i].QRSDeg, mq[j].QRSDeg
			if a.OK() && b.OK() {
				spread = math.Max(spread, math.Abs(angDiff(float64(a), float64(b))))
				n++
			}
		}
	}
	if n > 0 {
		ax.Spread = Num(spread)
	}
	f.Axis = ax
}

func (m *measurer) precordial(f *Findings) {
	r, s := make([]float64, 6), make([]float64, 6)
	f.RProgression = make([]Num, 6)
	for i, l := range record.Precordial {
		r[i], s[i] = math.NaN(), math.NaN()
		if lm := f.Lead(l); lm != nil && lm.R.OK() && lm.S.OK() {
			r[i], s[i] = float64(lm.R), float64(lm.S)
		}
		f.RProgression[i] = Num(r[i])
	}
	f.TransitionAt = NaN()
	pos, label, class, ok := transition(r, s)
	if !ok {
		f.Transition, f.TransitionCl = "", "undetermined"
		return
	}
	f.TransitionAt, f.Transition, f.TransitionCl = Num(pos), label, class
}
