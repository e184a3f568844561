package report

import (
	"math"

	"tracelift/record"
	"tracelift/stats"
)

// stretch is a piece of one lead chosen for one place on the page.
type stretch struct {
	lead   string
	t0, t1 float64 // seconds on the tracing clock
	ok     bool    // false when the lead is absent or has no samples there
}

// coverage returns the fraction of [t0, t1) holding valid samples of s.
func coverage(s *record.Signal, t0, t1 float64) float64 {
	if s == nil || t1 <= t0 {
		return 0
	}
	n, good := 0, 0
	for t := t0; t < t1; t += 1 / s.RateHz {
		n++
		if _, ok := s.At(t); ok {
			good++
		}
	}
	if n == 0 {
		return 0
	}
	return float64(good) / float64(n)
}

// firstValid returns the time of the first non-gap sample of s.
func firstValid(s *record.Signal) (float64, bool) {
	for i, v := range s.MV {
		if !math.IsNaN(v) {
			return s.StartS + float64(i)/s.RateHz, true
		}
	}
	return 0, false
}

// chooseStretch picks the stretch of lead drawn in a slot of dur seconds
// that would start at want on a printout recorded all at once. A printout
// traced from a 3×4 page holds each lead only during its own column, so
// when the lead covers less than half of the wanted window its own first
// dur seconds are drawn instead.
func chooseStretch(rec *record.Record, lead string, want, dur float64) stretch {
	s := rec.Lead(lead)
	st := stretch{lead: lead, t0: want, t1: want + dur}
	if s == nil || len(s.MV) == 0 {
		return st
	}
	if coverage(s, want, want+dur) >= 0.5 {
		st.ok = true
		return st
	}
	if t, ok := firstValid(s); ok {
		st.t0, st.t1, st.ok = t, t+dur, true
	}
	return st
}

// rhythmLead returns the lead drawn along the whole strip.
func rhythmLead(rec *record.Record, want string) string {
	if want != "" && rec.Lead(want) != nil {
		return record.CanonicalLead(want)
	}
	if rec.Lead(record.II) != nil {
		return record.II
	}
	best, bestDur := "", -1.0
	for i := range rec.Signals {
		s := &rec.Signals[i]
		if d := float64(len(s.MV)) / s.RateHz; d > bestDur {
			best, bestDur = s.Lead, d
		}
	}
	return best
}

// clockStart is the earliest start of any lead.
func clockStart(rec *record.Record) float64 {
	t := math.Inf(1)
	for i := range rec.Signals {
		t = math.Min(t, rec.Signals[i].StartS)
	}
	if math.IsInf(t, 0) {
		return 0
	}
	return t
}

// level is the median of the valid samples of s in [t0, t1)
// (stats.Median); 0 when there are none.
func level(s *record.Signal, t0, t1 float64) float64 {
	i0 := int(math.Ceil((t0 - s.StartS) * s.RateHz))
	i1 := int(math.Ceil((t1 - s.StartS) * s.RateHz))
	i0, i1 = max(i0, 0), min(i1, len(s.MV))
	var v []float64
	for i := i0; i < i1; i++ {
		if !math.IsNaN(s.MV[i]) {
			v = append(v, s.MV[i])
		}
	}
	if len(v) == 0 {
		return 0
	}
	return stats.Median(v)
}

// pathMM turns the stretch [t0, t1) of s into page polylines (mm): x from
// x0 at 25 mm/s, y about the baseline y0 at 10 mm/mV, the stretch's median
// drawn on the baseline so that an offset left by tracing does not push
// the lead out of its row. Gaps (NaN) break the line. Samples closer than
// 0.1 mm in x are thinned to their minimum and maximum, in time order, so
// peaks survive.
func pathMM(s *record.Signal, t0, t1, x0, y0 float64) [][][2]float64 {
	if s == nil || s.RateHz <= 0 {
		return nil
	}
	base := level(s, t0, t1)
	i0 := int(math.Ceil((t0 - s.StartS) * s.RateHz))
	i1 := int(math.Ceil((t1 - s.StartS) * s.RateHz))
	i0, i1 = max(i0, 0), min(i1, len(s.MV))
	const bucketMM = 0.1
	var out [][][2]float64
	var cur [][2]float64
	flush := func() {
		if len(cur) > 1 {
			out = append(out, cur)
		}
		cur = nil
	}
	bucket := math.MinInt
	var lo, hi [2]float64
	var have bool
	emit := func() {
		if !have {
			return
		}
		if lo[0] <= hi[0] {
			cur = append(cur, lo)
			if hi != lo {
				cur = append(cur, hi)
			}
		} else {
			cur = append(cur, hi, lo)
		}
		have = false
	}
	for i := i0; i < i1; i++ {
		v := s.MV[i]
		if math.IsNaN(v) {
			emit()
			flush()
			bucket = math.MinInt
			continue
		}
		t := s.StartS + float64(i)/s.RateHz
		p := [2]float64{timeToX(x0, t0, t), mvToY(y0, v-base)}
		b := int(math.Floor((p[0] - x0) / bucketMM))
		if b != bucket {
			emit()
			bucket = b
			lo, hi, have = p, p, true
			continue
		}
		if p[1] > lo[1] { // larger y = lower on the page
			lo = p
		}
		if p[1] < hi[1] {
			hi = p
		}
	}
	emit()
	flush()
	return out
}

// loneLead returns the name of the record's only lead, "" when it holds
// none or several.
func loneLead(rec *record.Record) string {
	if rec == nil || len(rec.Signals) != 1 {
		return ""
	}
	return record.CanonicalLead(rec.Signals[0].Lead)
}
