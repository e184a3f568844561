package digitize

import (
	"math"
	"sort"
	"strings"

	"tracelift/calib"
	"tracelift/record"
)

// leadSign splits a printed lead name into the standard lead and its
// sign: Cabrera's "-aVR" is aVR drawn inverted.
func leadSign(printed string) (string, float64) {
	n := strings.TrimSpace(printed)
	if strings.HasPrefix(n, "-") || strings.HasPrefix(n, "−") {
		n = strings.TrimPrefix(strings.TrimPrefix(n, "-"), "−")
		return record.CanonicalLead(n), -1
	}
	return record.CanonicalLead(n), 1
}

// Signals turns pixel traces into a record of mV signals at rateHz on the
// tracing's clock (rateHz ≤ 0 means 500). For a trace of panel p, column x
// is sampled at t = p.T0S + (x + 0.5 − p.Box[0]) / (PxPerMM·SpeedMMPerS)
// with mV = (p.BaselineY − y) / (PxPerMM·GainMMPerMV). Each lead's signal
// covers the union of its panels' windows; where a lead is drawn twice
// (a panel and a rhythm strip), the second drawing is brought to the first
// one's baseline over their overlap and the two are averaged. Gaps are NaN.
// Leads come out in the standard order, then any others by name.
func Signals(cal *calib.Result, panels []Panel, traces []Trace, rateHz float64) *record.Record {
	if rateHz <= 0 || math.IsNaN(rateHz) || math.IsInf(rateHz, 0) {
		rateHz = 500
	}
	rec := &record.Record{Name: "digitized"}
	if cal == nil || !(cal.PxPerMM > 0) || !(cal.SpeedMMPerS > 0) || !(cal.GainMMPerMV > 0) {
		return rec
	}
	pxPerS := cal.PxPerMM * cal.SpeedMMPerS
	pxPerMV := cal.PxPerMM * cal.GainMMPerMV
	type part struct {
		t0, t1 float64
		mv     []float64 // on the lead's common grid from t0 (index 0 at the lead's start)
		rhythm bool
	}
	type lead struct {
		name   string
		t0, t1 float64
		parts  []part
	}
	leads := map[string]*lead{}
	var order []string
	for _, tr := range traces {
		if tr.Panel < 0 || tr.Panel >= len(panels) {
			continue
		}
		p := panels[tr.Panel]
		name, sign := leadSign(p.Lead)
		if tr.Lead != "" {
			name, sign = leadSign(tr.Lead)
		}
		if name == "" {
			continue
		}
		l := leads[name]
		if l == nil {
			l = &lead{name: name, t0: p.T0S, t1: p.T1S}
			leads[name] = l
			order = append(order, name)
		}
		l.t0 = math.Min(l.t0, p.T0S)
		l.t1 = math.Max(l.t1, p.T1S)
		l.parts = append(l.parts, part{t0: p.T0S, t1: p.T1S, rhythm: p.Rhythm})
		// The trace as a signal: one sample per column, column x at
		// t = p.T0S + (x + 0.5 − p.Box[0]) / pxPerS.
		sig := record.Signal{
			RateHz: pxPerS,
			StartS: p.T0S + (float64(tr.X0)+0.5-p.Box[0])/pxPerS,
			MV:     make([]float64, len(tr.Y)),
		}
		for i, y := range tr.Y {
			sig.MV[i] = sign * (p.BaselineY - y) / pxPerMV
		}
		pp := &l.parts[len(l.parts)-1]
		pp.mv = resampleOnto(&sig, p.T0S, p.T1S, rateHz)
	}
	for _, name := range order {
		l := leads[name]
		n := int(math.Round((l.t1 - l.t0) * rateHz))
		if n <= 0 {
			continue
		}
		// Rhythm strips first: they set the baseline of the whole lead.
		parts := l.parts
		sort.SliceStable(parts, func(i, j int) bool { return parts[i].rhythm && !parts[j].rhythm })
		sum := make([]float64, n)
		cnt := make([]float64, n)
		for pi, pt := range parts {
			off := int(math.Round((pt.t0 - l.t0) * rateHz))
			shift := 0.0
			if pi > 0 { // align to what is already there
				var d []float64
				for k, v := range pt.mv {
					j := off + k
					if j >= 0 && j < n && cnt[j] > 0 && !math.IsNaN(v) {
						d = append(d, sum[j]/cnt[j]-v)
					}
				}
				if len(d) > 0 {
					sort.Float64s(d)
					shift = d[len(d)/2]
				}
			}
			for k, v := range pt.mv {
				j := off + k
				if j >= 0 && j < n && !math.IsNaN(v) {
					sum[j] += v + shift
					cnt[j]++
				}
			}
		}
		sig := record.Signal{Lead: name, RateHz: rateHz, StartS: l.t0, MV: make([]float64, n)}
		for j := range sig.MV {
			if cnt[j] > 0 {
				sig.MV[j] = sum[j] / cnt[j]
			} else {
				sig.MV[j] = math.NaN()
			}
		}
		rec.Signals = append(rec.Signals, sig)
	}
	sortLeads(rec.Signals)
	rec.Provenance = record.Provenance{
		PxPerMMX:    cal.PxPerMMX,
		PxPerMMY:    cal.PxPerMMY,
		GainMMPerMV: cal.GainMMPerMV,
		SpeedMMPerS: cal.SpeedMMPerS,
		ScaleSource: cal.Source,
		Software:    "tracelift digitize",
	}
	return rec
}

// resampleOnto samples the trace s at t0 + k/rate for k in
// [0, round((t1−t0)·rate)) by record's linear interpolation
// (Signal.AtIndex), NaN next to a NaN; within half a column of either end
// the end's value holds, and beyond that it is NaN.
func resampleOnto(s *record.Signal, t0, t1, rate float64) []float64 {
	n := int(math.Round((t1 - t0) * rate))
	if n < 0 {
		n = 0
	}
	out := make([]float64, n)
	last := float64(len(s.MV) - 1)
	for k := range out {
		x := (t0 + float64(k)/rate - s.StartS) * s.RateHz
		switch {
		case len(s.MV) == 0:
			out[k] = math.NaN()
		case len(s.MV) == 1 || x < -0.5 || x > last+0.5:
			out[k] = math.NaN()
		case x <= 0:
			out[k] = s.MV[0]
		case x >= last:
			out[k] = s.MV[len(s.MV)-1]
		default:
			out[k] = s.AtIndex(x)
		}
	}
	return out
}

func leadRank(name string) int {
	for i, l := range record.Standard12 {
		if l == name {
			return i
		}
	}
	return len(record.Standard12)
}

func sortLeads(s []record.Signal) {
	sort.SliceStable(s, func(i, j int) bool {
		ri, rj := leadRank(s[i].Lead), leadRank(s[j].Lead)
		if ri != rj {
			return ri < rj
		}
		return s[i].Lead < s[j].Lead
	})
}
