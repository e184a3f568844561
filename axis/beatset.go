package axis

import (
	"fmt"
	"math"
)

// The beats cut around each R, their templates and their classes.

// extract detrends every lead with knots at [k0, k1] s from each R and
// cuts the beats.
func (m *measurer) extract(k0, k1 float64) {
	ns := len(m.rec.Signals)
	m.y = make([][]float64, ns)
	m.segs = make([][][]float64, ns)
	bt := m.beatTimes()
	for si := range m.rec.Signals {
		s := &m.rec.Signals[si]
		m.y[si] = detrend(s, bt, k0, k1)
		m.segs[si] = make([][]float64, len(m.beats))
		for bi, b := range m.beats {
			if b.t+m.win.post < s.StartS || b.t-m.win.pre > s.EndS() {
				continue
			}
			m.segs[si][bi] = segment(nil, m.y[si], s, b.t, m.win)
		}
	}
}

// buildTemplates takes the median of the chosen beats per lead (all the
// lead's beats when none of the chosen ones falls inside it).
func (m *measurer) buildTemplates(use func(bi int) bool) { m.buildSome(use, nil) }

// buildSome builds the templates of the leads with only[si] true (all
// when only is nil); the others become nil.
func (m *measurer) buildSome(use func(bi int) bool, only []bool) {
	m.tpl = make([][]float64, len(m.rec.Signals))
	for si := range m.rec.Signals {
		if only != nil && !only[si] {
			continue
		}
		var chosen, all [][]float64
		for bi, sg := range m.segs[si] {
			if sg == nil {
				continue
			}
			all = append(all, sg)
			if use(bi) {
				chosen = append(chosen, sg)
			}
		}
		if len(chosen) == 0 {
			chosen = all
		}
		if len(chosen) == 0 {
			continue
		}
		pick := evenly(len(chosen), maxTemplateBeats)
		sel := make([][]float64, len(pick))
		for i, p := range pick {
			sel[i] = chosen[p]
		}
		m.tpl[si] = medianBeat(sel, m.win.n)
	}
}

// templates aligns the beats and builds the representative beats in two
// passes: the first with baseline knots at a fixed offset before R, the
// second with knots in the PR segment found by the first.
func (m *measurer) templates() error {
	m.win = beatWindow(m.rrMed)
	m.extract(-0.10, -0.07)
	// Align the beats. The reference is the lead that holds the most
	// beats (a rhythm strip when there is one), so that beats found on
	// different leads, whose R fiducials sit at different points of the
	// QRS, end up on one time reference; beats it does not hold are
	// aligned on their detecting lead. Two passes: the first template is
	// blurred by the misaligned beats, the second is sharp.
	ref, best := -1, 0
	for si := range m.segs {
		n := 0
		for _, sg := range m.segs[si] {
			if sg != nil {
				n++
			}
		}
		if n > best {
			ref, best = si, n
		}
	}
	lead := func(bi int) int {
		if ref >= 0 && m.segs[ref][bi] != nil {
			return ref
		}
		return m.beats[bi].lead
	}
	lo, hi := m.win.r0-int(0.100*tplHz), min(m.win.n, m.win.r0+int(0.150*tplHz))
	need := make([]bool, len(m.rec.Signals))
	for bi := range m.beats {
		need[lead(bi)] = true
	}
	all := func(int) bool { return true }
	for pass := 0; pass < 2; pass++ {
		m.buildSome(all, need)
		moved := false
		for bi := range m.beats {
			b := &m.beats[bi]
			li := lead(bi)
			maxSh := int(0.020 * tplHz)
			if li != b.lead && pass == 0 {
				maxSh = int(0.060 * tplHz)
			}
			sg, tp := m.segs[li][bi], m.tpl[li]
			if sg == nil || tp == nil {
				continue
			}
			if sh, _ := corrShift(tp, sg, lo, hi, maxSh); sh != 0 {
				b.t += float64(sh) / tplHz
				moved = true
			}
		}
		if moved {
			m.extract(-0.10, -0.07)
		}
	}
	// QRS shape: correlation with the reference lead's template over
	// ±60 ms.
	m.buildSome(all, need)
	q := int(0.060 * tplHz)
	for bi := range m.beats {
		b := &m.beats[bi]
		li := lead(bi)
		sg, tp := m.segs[li][bi], m.tpl[li]
		b.corr = math.NaN()
		if sg != nil && tp != nil {
			_, b.corr = corrShift(tp, sg, m.win.r0-q, m.win.r0+q+1, 1)
		}
	}
	m.buildTemplates(m.dominant)
	f0 := delineate(m.nonNil(), m.weights(), m.win.r0, 1)
	if !math.IsNaN(f0.on) {
		on := (f0.on - float64(m.win.r0)) / tplHz
		m.extract(on-0.020, on-0.004)
		m.buildTemplates(m.dominant)
	}
	tp := m.nonNil()
	if len(tp) == 0 {
		return fmt.Errorf("%w: no lead holds a complete beat", ErrNoLead)
	}
	w := m.weights()
	m.fid = delineate(tp, w, m.win.r0, 1)
	m.fidS[0] = delineate(tp, w, m.win.r0, 0.7)
	m.fidS[1] = delineate(tp, w, m.win.r0, 1.4)
	if math.IsNaN(m.fid.on) || math.IsNaN(m.fid.off) {
		return fmt.Errorf("%w: no QRS complex could be delineated", ErrNoBeats)
	}
	return nil
}

// dominant reports whether beat bi is of the dominant shape and not early.
func (m *measurer) dominant(bi int) bool {
	b := m.beats[bi]
	if !math.IsNaN(b.corr) && b.corr < 0.9 {
		return false
	}
	return !(b.rr < 0.8*m.rrMed)
}

func (m *measurer) nonNil() [][]float64 {
	var out [][]float64
	for _, t := range m.tpl {
		if t != nil {
			out = append(out, t)
		}
	}
	return out
}

func (m *measurer) weights() []float64 {
	var w []float64
	for si, t := range m.tpl {
		if t != nil {
			w = append(w, m.qual(m.rec.Signals[si].Lead))
		}
	}
	return w
}

func (m *measurer) classify(f *Findings) {
	for bi, b := range m.beats {
		pre := b.rr < 0.8*m.rrMed
		diff := !math.IsNaN(b.corr) && b.corr < 0.9
		cl := "dominant"
		switch {
		case pre && diff:
			cl = "premature-different"
		case pre:
			cl = "premature"
		case diff:
			cl = "different"
		}
		m.beats[bi].class = cl
		if pre {
			f.Premature++
		}
		f.Beats = append(f.Beats, Beat{TS: b.t, RRS: Num(b.rr), Lead: m.rec.Signals[b.lead].Lead, Premature: pre, Class: cl, Corr: Num(b.corr)})
	}
}
