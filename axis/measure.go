package axis

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"tracelift/record"
	"tracelift/stats"

	"gonum.org/v1/gonum/stat"
)

// mbeat is a beat of the merged beat list.
type mbeat struct {
	t     float64
	lead  int // index into rec.Signals of the detecting lead
	seg   int // stretch id: RR is only taken between beats of one stretch
	rr    float64
	corr  float64
	class string
}

// Measure finds the beats of rec and measures it. Leads may hold NaN
// gaps and may cover different time windows (as the panels of a printout
// do); each lead's representative beat is built from the beats that fall
// inside its window.
func Measure(rec *record.Record, opt Options) (*Findings, error) {
	if rec == nil {
		return nil, errors.New("axis: no record")
	}
	if err := rec.Validate(); err != nil {
		return nil, fmt.Errorf("axis: %w", err)
	}
	qual := func(lead string) float64 {
		q, ok := opt.LeadQuality[lead]
		if !ok {
			return 1
		}
		if math.IsNaN(q) {
			return 0
		}
		return math.Max(0, math.Min(1, q))
	}
	if opt.BeatLead != "" && rec.Lead(opt.BeatLead) == nil {
		return nil, fmt.Errorf("axis: beat lead %q is not in the record (leads: %v)", opt.BeatLead, rec.Leads())
	}

	// 1. Beats on every usable lead, then merged: the best lead first,
	// others only where it has no signal.
	type cand struct {
		si  int
		d   *leadDetections
		cov float64
	}
	var cands []cand
	var maxCov float64
	for si := range rec.Signals {
		s := &rec.Signals[si]
		if opt.BeatLead != "" && s.Lead != record.CanonicalLead(opt.BeatLead) {
			continue
		}
		if qual(s.Lead) == 0 {
			continue
		}
		d, err := detectLead(s)
		if err != nil {
			continue
		}
		c := cand{si: si, d: d}
		for _, sp := range d.spans {
			c.cov += sp[1] - sp[0]
		}
		maxCov = math.Max(maxCov, c.cov)
		cands = append(cands, c)
	}
	if len(cands) == 0 {
		if opt.BeatLead != "" {
			return nil, fmt.Errorf("%w: lead %s has no gap-free stretch of %.0f s at a usable rate", ErrNoLead, opt.BeatLead, minRunS)
		}
		return nil, ErrNoLead
	}
	if maxCov < 2 {
		return nil, ErrTooShort
	}
	// Agreement: the share of a lead's beats that the other leads
	// recording at the same moment also find (within 80 ms). A lead whose
	// QRS is nearly isoelectric can lock onto its T waves; the others
	// then outvote it.
	agree := make([]float64, len(cands))
	for ci, c := range cands {
		var checks, hits int
		for _, b := range c.d.beats {
			for oi, o := range cands {
				if oi == ci || !o.d.covers(b.t, 0.3) {
					continue
				}
				checks++
				if o.d.hasBeatNear(b.t, 0.08) {
					hits++
				}
			}
		}
		agree[ci] = 0.5
		if checks > 0 {
			agree[ci] = float64(hits) / float64(checks)
		}
	}
	// Strength: the median integrated-energy peak of the lead's beats. A
	// lead locked onto T waves has weak peaks in the 5–15 Hz band.
	strength := make([]float64, len(cands))
	var maxStrength float64
	for ci, c := range cands {
		pk := make([]float64, 0, len(c.d.beats))
		for _, b := range c.d.beats {
			pk = append(pk, b.peak)
		}
		if len(pk) > 0 {
			strength[ci] = stats.MedianInPlace(pk)
		}
		maxStrength = math.Max(maxStrength, strength[ci])
	}
	for ci, c := range cands {
		snr := 0.5 + 0.5*math.Min(c.d.score, 20)/20
		amp := 0.0
		if maxStrength > 0 {
			amp = math.Sqrt(strength[ci] / maxStrength)
		}
		c.d.rank = c.cov / maxCov * qual(rec.Signals[c.si].Lead) * agree[ci] * agree[ci] * snr * amp
		c.d.agree = agree[ci]
	}
	rank := func(c cand) float64 { return c.d.rank }
	sort.SliceStable(cands, func(a, b int) bool { return rank(cands[a]) > rank(cands[b]) })

	var beats []mbeat
	var covered [][2]float64
	inside := func(t float64) bool {
		for _, sp := range covered {
			if t > sp[0]+0.3 && t < sp[1]-0.3 {
				return true
			}
		}
		return false
	}
	near := func(t float64) bool {
		for _, b := range beats {
			if math.Abs(b.t-t) < 0.25 {
				return true
			}
		}
		return false
	}
	for ci, c := range cands {
		for _, b := range c.d.beats {
			if ci > 0 && (inside(b.t) || near(b.t)) {
				continue
			}
			beats = append(beats, mbeat{t: b.t, lead: c.si, seg: ci<<16 | b.run})
		}
		covered = append(covered, c.d.spans...)
	}
	if len(beats) == 0 {
		return nil, ErrNoBeats
	}
	sort.Slice(beats, func(a, b int) bool { return beats[a].t < beats[b].t })

	f := &Findings{Record: rec.Name, Caution: Caution, BeatLead: rec.Signals[cands[0].si].Lead}
	m := &measurer{rec: rec, qual: qual, beats: beats}
	// RR intervals come from one lead where one lead covers most of the
	// record and agrees with the others (a rhythm strip): R fiducials of
	// different leads differ by tens of ms, so intervals between beats
	// found on different leads would carry that offset.
	rrLead := -1
	for ci, c := range cands {
		if c.cov >= 0.8*maxCov && c.d.agree >= 0.8 && c.d.rank > 0 && (rrLead < 0 || c.cov > cands[rrLead].cov) {
			rrLead = ci
		}
	}
	if rrLead >= 0 {
		m.rrFrom = cands[rrLead].d
	}
	empty, found := m.recoverMissed()
	m.rhythm(f)
	rhythmNote(f, empty, found)
	if err := m.templates(); err != nil {
		return nil, err
	}
	m.classify(f)
	m.measureLeads(f)
	m.axes(f)
	m.precordial(f)
	m.uncertainty(f, opt.Picture)
	borderlines(f)
	flags(f)
	return f, nil
}

// measurer carries the state between the stages of Measure.
type measurer struct {
	rec   *record.Record
	qual  func(string) float64
	beats []mbeat
	rrMed float64
	win   window
	// per lead (index of rec.Signals): detrended samples, per-beat
	// segments (nil when the beat is outside the lead), template.
	y    [][]float64
	segs [][][]float64
	tpl  [][]float64
	fid  fid
	fidS [2]fid // threshold sensitivity runs
	// rrFrom, when set, is the single lead whose beats give the RR
	// intervals.
	rrFrom *leadDetections
	// spread is the engine's own share of each measurement's error in
	// the 90 % intervals (the standard error over beats, the threshold
	// sensitivity and the grid step), keyed like Findings.PictureSD.
	spread map[string]float64
}

func (m *measurer) rhythm(f *Findings) {
	var rrs []float64
	for i := range m.beats {
		m.beats[i].rr = math.NaN()
		if i > 0 && m.beats[i].seg == m.beats[i-1].seg {
			m.beats[i].rr = m.beats[i].t - m.beats[i-1].t
			rrs = append(rrs, m.beats[i].rr)
		}
	}
	if d := m.rrFrom; d != nil {
		var own []float64
		for i := 1; i < len(d.beats); i++ {
			if d.beats[i].run == d.beats[i-1].run {
				own = append(own, d.beats[i].t-d.beats[i-1].t)
			}
		}
		if len(own) >= len(rrs)/2 && len(own) > 0 {
			rrs = own
		}
	}
	f.HeartRateBPM, f.HeartRateSD, f.RRMeanS, f.RRSDS = NaN(), NaN(), NaN(), NaN()
	f.Rhythm = "undetermined"
	m.rrMed = math.NaN()
	if len(rrs) == 0 {
		return
	}
	mean, sd := meanSD(rrs)
	hr := make([]float64, len(rrs))
	for i, v := range rrs {
		hr[i] = 60 / v
	}
	_, hsd := meanSD(hr)
	m.rrMed = stats.Median(rrs)
	f.RRMeanS, f.RRSDS = Num(mean), Num(sd)
	f.HeartRateBPM = Num(60 / mean)
	f.HeartRateSD = Num(hsd)
	if len(rrs) >= 3 {
		// Regularity: RR coefficient of variation below 10 % after setting
		// premature beats aside (this package's threshold).
		var clean []float64
		for _, v := range rrs {
			if v >= 0.8*m.rrMed && v <= 1.25*m.rrMed {
				clean = append(clean, v)
			}
		}
		_, csd := meanSD(clean)
		if len(clean) >= 2 && csd/m.rrMed < 0.10 && len(clean)*10 >= len(rrs)*8 {
			f.Rhythm = "regular"
		} else {
			f.Rhythm = "irregular"
		}
	}
}

// meanSD returns the mean and the sample standard deviation of x (gonum's
// stat.MeanStdDev, unbiased); NaN for both when x is empty, NaN for the
// deviation of a single value.
func meanSD(x []float64) (mean, sd float64) {
	switch len(x) {
	case 0:
		return math.NaN(), math.NaN()
	case 1:
		return x[0], math.NaN()
	}
	return stat.MeanStdDev(x, nil)
}

func (m *measurer) beatTimes() []float64 {
	t := make([]float64, len(m.beats))
	for i, b := range m.beats {
		t[i] = b.t
	}
	return t
}

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
		qv, sv := 0.0, 0.0
		for k := on; k < ri; k++ {
			if v := x[k] - base; v < qv {
				qv = v
			}
		}
		for k := ri + 1; k <= off; k++ {
			if v := x[k] - base; v < sv {
				sv = v
			}
		}
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

func (m *measurer) intervals(f *Findings) {
	iv := Intervals{PR: NaN(), QRS: NaN(), QT: NaN(), QTcBazett: NaN(), QTcFridericia: NaN(), QTcFramingham: NaN(), QTcHodges: NaN(), RR: NaN(), PRSD: NaN(), QRSSD: NaN(), QTSD: NaN(), QTcSD: NaN()}
	get := func(fd fid) (pr, qrs, qt float64) {
		return gridMS(fd.on - fd.pOn), gridMS(fd.off - fd.on), gridMS(fd.tEnd - fd.on)
	}
	pr, qrs, qt := get(m.fid)
	iv.PR, iv.QRS, iv.QT = Num(pr), Num(qrs), Num(qt)

	// Uncertainty: the spread between beats (each dominant beat delineated
	// on the leads that hold it, at most 30 beats), how much the result
	// moves when the thresholds are scaled by 0.7 and 1.4, the grid step,
	// and the digitization quality (up to 10 ms at quality 0, this
	// package's allowance for a trace placed a pixel or two off).
	var bpr, bqrs, bqt []float64
	var dom []int
	for bi := range m.beats {
		if m.dominant(bi) {
			dom = append(dom, bi)
		}
	}
	w := make([]float64, 0, len(m.tpl))
	tp := make([][]float64, 0, len(m.tpl))
	for _, k := range evenly(len(dom), 30) {
		bi := dom[k]
		w, tp = w[:0], tp[:0]
		for si := range m.segs {
			if sg := m.segs[si][bi]; sg != nil {
				tp = append(tp, sg)
				w = append(w, m.qual(m.rec.Signals[si].Lead))
			}
		}
		if len(tp) == 0 {
			continue
		}
		a, b, c := get(delineate(tp, w, m.win.r0, 1))
		bpr, bqrs, bqt = appendOK(bpr, a), appendOK(bqrs, b), appendOK(bqt, c)
	}
	var qs float64
	var nq int
	for _, s := range m.rec.Signals {
		qs += m.qual(s.Lead)
		nq++
	}
	qpen := 10 * (1 - qs/float64(nq))
	sens := func(i int) float64 {
		a0, b0, c0 := get(m.fidS[0])
		a1, b1, c1 := get(m.fidS[1])
		v := [][2]float64{{a0, a1}, {b0, b1}, {c0, c1}}[i]
		d := math.Abs(v[0]-v[1]) / 2
		if math.IsNaN(d) {
			return 0
		}
		return d
	}
	res := 1000 / tplHz / math.Sqrt(12)
	if m.spread == nil {
		m.spread = map[string]float64{}
	}
	names := [3]string{"pr", "qrs", "qt"}
	comb := func(beat []float64, i int) Num {
		_, sd := meanSD(beat)
		if math.IsNaN(sd) {
			sd = 0
		}
		s := sens(i)
		se := sd / math.Sqrt(math.Max(1, float64(len(beat))))
		m.spread[names[i]] = math.Sqrt(se*se + s*s + res*res)
		return Num(math.Sqrt(sd*sd + s*s + res*res + qpen*qpen))
	}
	if iv.PR.OK() {
		iv.PRSD = comb(bpr, 0)
	}
	if iv.QRS.OK() {
		iv.QRSSD = comb(bqrs, 1)
	}
	if iv.QT.OK() {
		iv.QTSD = comb(bqt, 2)
	}
	if f.RRMeanS.OK() {
		rr := float64(f.RRMeanS)
		iv.RR = Num(rr * 1000)
		if iv.QT.OK() {
			c := QTc(qt, rr)
			iv.QTcBazett, iv.QTcFridericia, iv.QTcFramingham, iv.QTcHodges = Num(c.Bazett), Num(c.Fridericia), Num(c.Framingham), Num(c.Hodges)
			// Bazett's QTc error: QT's error scaled, plus the RR spread's
			// effect (∂QTc/∂RR = −QTc/(2RR)) from the RR standard error.
			se := 0.0
			if f.RRSDS.OK() {
				se = float64(f.RRSDS) / math.Sqrt(float64(len(m.beats)))
			}
			a := float64(iv.QTSD) / math.Sqrt(rr)
			b := c.Bazett / (2 * rr) * se
			iv.QTcSD = Num(math.Hypot(a, b))
			m.spread["qtc_bazett"] = math.Hypot(m.spread["qt"]/math.Sqrt(rr), b)
		}
	}
	f.IntervalsMS = iv
}

func appendOK(x []float64, v float64) []float64 {
	if math.IsNaN(v) {
		return x
	}
	return append(x, v)
}

// QTcValues holds a QT corrected for rate by the four published formulas.
type QTcValues struct{ Bazett, Fridericia, Framingham, Hodges float64 }

// QTc corrects a QT interval (ms) for the RR interval (s):
//   - Bazett (Heart 7:353, 1920): QT/√RR
//   - Fridericia (Acta Med Scand 53:469, 1920): QT/∛RR
//   - Framingham (Sagie et al., Am J Cardiol 70:797, 1992): QT + 154·(1−RR)
//   - Hodges (J Am Coll Cardiol 1:694, 1983): QT + 1.75·(HR−60), HR = 60/RR
func QTc(qtMS, rrS float64) QTcValues {
	if !(rrS > 0) {
		n := math.NaN()
		return QTcValues{n, n, n, n}
	}
	return QTcValues{
		Bazett:     qtMS / math.Sqrt(rrS),
		Fridericia: qtMS / math.Cbrt(rrS),
		Framingham: qtMS + 154*(1-rrS),
		Hodges:     qtMS + 1.75*(60/rrS-60),
	}
}
