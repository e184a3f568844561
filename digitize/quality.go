package digitize

import (
	"fmt"
	"math"
	"sort"

	"tracelift/calib"
)

// Thresholds for the hand-check list.
const (
	lawWarnUV   = 100  // limb-law RMS residual worth a look, µV (a tenth of a 1 mm/0.1 mV box at 10 mm/mV is 10 µV; 100 µV is a full small box)
	faintConf   = 0.25 // per-column confidence below which the trace is faint or lost
	minPlaceS   = 0.04 // shortest stretch listed, s
	maxPlaces   = 60
	edgePinConf = 0.3
)

// leadConfidence is the mean per-column confidence of each lead's traces
// (lost columns count as 0), keyed by standard lead name.
func leadConfidence(panels []Panel, traces []Trace) map[string]float64 {
	sum, n := map[string]float64{}, map[string]float64{}
	for _, tr := range traces {
		name, _ := leadSign(tr.Lead)
		for i, c := range tr.Conf {
			if !math.IsNaN(tr.Y[i]) {
				sum[name] += float64(c)
			}
			n[name]++
		}
	}
	out := map[string]float64{}
	for k, v := range sum {
		if n[k] > 0 {
			out[k] = v / n[k]
		}
	}
	for k := range n {
		if _, ok := out[k]; !ok {
			out[k] = 0
		}
	}
	return out
}

// assess fills per-lead quality and the places to check.
func assess(cal *calib.Result, res *Result, conf, law map[string]float64) (map[string]LeadQuality, []Place) {
	q := map[string]LeadQuality{}
	var places []Place
	for _, s := range res.Record.Signals {
		lq := LeadQuality{}
		have := 0
		for _, v := range s.MV {
			if !math.IsNaN(v) {
				have++
			}
		}
		if len(s.MV) > 0 {
			lq.Coverage = float64(have) / float64(len(s.MV))
		}
		c := conf[s.Lead]
		if r, ok := law[s.Lead]; ok {
			lq.LawResidualUV = math.Round(r*10) / 10
			if r > lawWarnUV {
				c *= lawWarnUV / r
				lq.Notes = append(lq.Notes, fmt.Sprintf("disagrees with the other limb leads by %.0f µV RMS", r))
			}
		}
		if lq.Coverage < 0.95 {
			lq.Notes = append(lq.Notes, fmt.Sprintf("%.0f%% of its window has no trace", 100*(1-lq.Coverage)))
		}
		lq.Confidence = math.Round(math.Max(0, math.Min(1, c))*1000) / 1000
		q[s.Lead] = lq
	}
	pxPerS := cal.PxPerMM * cal.SpeedMMPerS
	for _, tr := range res.Traces {
		p := res.Panels[tr.Panel]
		name, _ := leadSign(tr.Lead)
		t := func(i int) float64 { return p.T0S + (float64(tr.X0+i)+0.5-p.Box[0])/pxPerS }
		// Runs of faint or lost columns.
		for i := 0; i < len(tr.Y); {
			bad := math.IsNaN(tr.Y[i]) || tr.Conf[i] < faintConf
			if !bad {
				i++
				continue
			}
			j, lost := i, false
			for j < len(tr.Y) && (math.IsNaN(tr.Y[j]) || tr.Conf[j] < faintConf) {
				lost = lost || math.IsNaN(tr.Y[j])
				j++
			}
			if t(j)-t(i) >= minPlaceS {
				why := "trace faint; the path was guessed"
				if lost {
					why = "no trace found"
				}
				places = append(places, Place{Lead: name, T0S: t(i), T1S: t(j), Why: why})
			}
			i = j
		}
		// Pinned at the band edge: the trace leaves its row.
		for i := 0; i < len(tr.Y); i++ {
			if math.IsNaN(tr.Y[i]) {
				continue
			}
			off := math.Abs(tr.Y[i] - p.BaselineY)
			if off > 0.9*(p.Box[3]-p.Box[1]) {
				j := i
				for j < len(tr.Y) && !math.IsNaN(tr.Y[j]) && math.Abs(tr.Y[j]-p.BaselineY) > 0.9*(p.Box[3]-p.Box[1]) {
					j++
				}
				places = append(places, Place{Lead: name, T0S: t(i), T1S: t(j), Why: "trace runs into the neighbouring row; check it was not swapped or clipped"})
				i = j
			}
		}
	}
	for _, lc := range res.Laws {
		worst := math.Max(lc.EinthovenRMSuV, math.Max(lc.GoldbergerRMSuV[0], math.Max(lc.GoldbergerRMSuV[1], lc.GoldbergerRMSuV[2])))
		if worst > lawWarnUV {
			places = append(places, Place{Lead: lc.Worst, T0S: lc.T0S, T1S: lc.T1S,
				Why: fmt.Sprintf("limb leads break Einthoven's or Goldberger's law by up to %.0f µV RMS; %s is the likeliest culprit", worst, lc.Worst)})
		}
	}
	sort.SliceStable(places, func(i, j int) bool {
		if places[i].Lead != places[j].Lead {
			return leadRank(places[i].Lead) < leadRank(places[j].Lead)
		}
		return places[i].T0S < places[j].T0S
	})
	if len(places) > maxPlaces {
		places = places[:maxPlaces]
	}
	return q, places
}
