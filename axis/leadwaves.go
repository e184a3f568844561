package axis

import (
	"math"
)

// Per-lead wave amplitudes and areas with the global fiducials.

// ms converts a grid index difference to milliseconds.
func gridMS(k float64) float64 { return k / tplHz * 1000 }

// waveAmps measures one lead's representative beat with the global
// fiducials.
func (m *measurer) waveAmps(x []float64, fd fid) LeadMeasure {
	lm := LeadMeasure{P: NaN(), Q: NaN(), R: NaN(), S: NaN(), STJ60: NaN(), T: NaN(), QRSPP: NaN(), PArea: NaN(), QRSArea: NaN(), TArea: NaN(), QRSSD: NaN()}
	on, off := int(fd.on), int(math.Ceil(fd.off))
	base := meanFinite(x, on-int(0.008*tplHz), on+1)
	if math.IsNaN(base) || off >= len(x) {
		return lm
	}
	dt := 1000 / tplHz
	// QRS: R the largest positive deflection, Q the negative one before
	// it, S the negative one after it (a QS complex has only Q).
	ri, rv := -1, 0.0
	mn, mx := math.Inf(1), math.Inf(-1)
	var area float64
	for k := on; k <= off; k++ {
		v := x[k] - base
		if math.IsNaN(v) {
			continue
		}
		area += v * dt
		mn, mx = math.Min(mn, v), math.Max(mx, v)
		if v > rv {
			ri, rv = k, v
		}
	}
	lm.QRSArea = Num(area)
	if !math.IsInf(mn, 0) {
		lm.QRSPP = Num(mx - mn)
	}
	if ri < 0 {
		lm.R, lm.Q, lm.S = 0, Num(math.Min(0, mn)), 0
	} else {
		lm.R = Num(rv)
		qv, sv := QSAround(x, on, ri, off, base)
		lm.Q, lm.S = Num(qv), Num(sv)
	}
	if j := int(math.Round(fd.off + 0.060*tplHz)); j < len(x) && !math.IsNaN(x[j]) {
		lm.STJ60 = Num(x[j] - base)
	}
	if !math.IsNaN(fd.tEnd) {
		var ta float64
		tv := 0.0
		for k := off; k <= int(fd.tEnd) && k < len(x); k++ {
			v := x[k] - base
			if math.IsNaN(v) {
				continue
			}
			ta += v * dt
			if k >= off+int(0.060*tplHz) && math.Abs(v) > math.Abs(tv) {
				tv = v
			}
		}
		lm.TArea, lm.T = Num(ta), Num(tv)
	}
	if !math.IsNaN(fd.pOn) {
		p0, p1 := int(fd.pOn), int(math.Ceil(fd.pOff))
		pb := meanFinite(x, p0-int(0.008*tplHz), p0+1)
		var pa float64
		pv := 0.0
		for k := p0; k <= p1 && k < len(x); k++ {
			v := x[k] - pb
			if math.IsNaN(v) {
				continue
			}
			pa += v * dt
			if math.Abs(v) > math.Abs(pv) {
				pv = v
			}
		}
		lm.PArea, lm.P = Num(pa), Num(pv)
	}
	return lm
}

// QSAround returns Q and S of a QRS complex on [on, off] whose R peak is
// at ri: the deepest dip below base before ri and after it (0 where the
// trace does not dip). Samples that are NaN are passed over.
func QSAround(x []float64, on, ri, off int, base float64) (q, s float64) {
	for k := on; k < ri; k++ {
		if v := x[k] - base; v < q {
			q = v
		}
	}
	for k := ri + 1; k <= off; k++ {
		if v := x[k] - base; v < s {
			s = v
		}
	}
	return q, s
}

// netQRS returns a beat's net QRS area with the global fiducials.
func netQRS(x []float64, fd fid) float64 {
	on, off := int(fd.on), int(math.Ceil(fd.off))
	base := meanFinite(x, on-int(0.008*tplHz), on+1)
	if math.IsNaN(base) || off >= len(x) {
		return math.NaN()
	}
	var a float64
	for k := on; k <= off; k++ {
		if !math.IsNaN(x[k]) {
			a += (x[k] - base) * 1000 / tplHz
		}
	}
	return a
}

func (m *measurer) measureLeads(f *Findings) {
	fd := m.fid
	r0 := float64(m.win.r0)
	rel := func(k float64) Num { return Num(gridMS(k - r0)) }
	f.Fiducials = Fiducials{POn: rel(fd.pOn), POff: rel(fd.pOff), QRSOn: rel(fd.on), QRSOff: rel(fd.off), TPeak: rel(fd.tPeak), TEnd: rel(fd.tEnd)}
	for si, x := range m.tpl {
		if x == nil {
			continue
		}
		s := &m.rec.Signals[si]
		lm := m.waveAmps(x, fd)
		lm.Lead, lm.Quality = s.Lead, m.qual(s.Lead)
		var nets []float64
		for bi, sg := range m.segs[si] {
			if sg != nil && m.dominant(bi) {
				lm.Beats++
				if v := netQRS(sg, fd); !math.IsNaN(v) {
					nets = append(nets, v)
				}
			}
		}
		if lm.Beats == 0 {
			for _, sg := range m.segs[si] {
				if sg != nil {
					lm.Beats++
				}
			}
		}
		if _, sd := meanSD(nets); !math.IsNaN(sd) {
			lm.QRSSD = Num(sd)
		}
		f.Leads = append(f.Leads, lm)
		f.Templates = append(f.Templates, Template{Lead: s.Lead, RateHz: tplHz, T0S: -float64(m.win.r0) / tplHz, MV: x})
	}
	m.intervals(f)
}
