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
