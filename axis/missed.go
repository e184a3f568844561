package axis

import (
	"fmt"
	"math"
	"sort"

	"tracelift/stats"
)

// Missed beats. The detector's T-wave test and its refractory period can
// drop a premature beat that falls early, close behind the one before;
// what is left is an RR interval much longer than its neighbours (the
// early beat's own RR plus the pause after it). Such a gap is searched
// again for a QRS-like slope; a slope as steep as half the detected
// beats' median (a T wave is far flatter, common practice) is taken as a
// beat. A long gap with nothing in it leaves the rhythm call unsure.

// longGap is the RR ratio to the median RR from which a gap is searched
// (a premature beat at 0.8 RR followed by a full compensatory pause
// leaves 2 RR; a sinus arrhythmia rarely reaches 1.5, common practice).
const longGap = 1.5

// recoverMissed searches the long gaps of m.beats and adds the beats it
// finds. It returns the gaps where nothing was found, as times.
func (m *measurer) recoverMissed() (empty [][2]float64, found int) {
	var rrs []float64
	for i := 1; i < len(m.beats); i++ {
		if m.beats[i].seg == m.beats[i-1].seg {
			rrs = append(rrs, m.beats[i].t-m.beats[i-1].t)
		}
	}
	if len(rrs) < 3 {
		return nil, 0
	}
	med := stats.Median(rrs)
	slopeAt := func(si int, t0, t1 float64) (float64, float64) {
		s := &m.rec.Signals[si]
		fs := s.RateHz
		h := max(1, int(math.Round(0.008*fs))) // ±8 ms central difference
		i0 := max(h, int(math.Ceil((t0-s.StartS)*fs)))
		i1 := min(len(s.MV)-h-1, int(math.Floor((t1-s.StartS)*fs)))
		best, bt := 0.0, math.NaN()
		for i := i0; i <= i1; i++ {
			d := math.Abs(s.MV[i+h] - s.MV[i-h])
			if !math.IsNaN(d) && d > best {
				best, bt = d, s.StartS+float64(i)/fs
			}
		}
		return best, bt
	}
	// The detected beats' own slopes, per lead.
	own := map[int][]float64{}
	for _, b := range m.beats {
		if v, _ := slopeAt(b.lead, b.t-0.05, b.t+0.05); v > 0 {
			own[b.lead] = append(own[b.lead], v)
		}
	}
	var add []mbeat
	for i := 1; i < len(m.beats); i++ {
		a, b := m.beats[i-1], m.beats[i]
		if a.seg != b.seg || b.t-a.t < longGap*med {
			continue
		}
		ref := own[a.lead]
		if len(ref) < 3 {
			empty = append(empty, [2]float64{a.t, b.t})
			continue
		}
		typ := stats.Median(ref)
		// Search from 200 ms after the beat (the refractory period) to
		// 200 ms before the next.
		v, t := slopeAt(a.lead, a.t+0.2, b.t-0.2)
		if v >= 0.5*typ && !math.IsNaN(t) {
			// Place the fiducial at the largest deflection within ±50 ms
			// of the steepest slope, like the detected beats' R.
			nb := mbeat{t: m.peakNear(a.lead, t, 0.05), lead: a.lead, seg: a.seg}
			add = append(add, nb)
			if d := m.rrFrom; d != nil && d.lead == m.rec.Signals[a.lead].Lead {
				d.beats = append(d.beats, detection{t: nb.t, run: a.seg & 0xffff})
				sort.Slice(d.beats, func(x, y int) bool { return d.beats[x].t < d.beats[y].t })
			}
			continue
		}
		empty = append(empty, [2]float64{a.t, b.t})
	}
	if len(add) > 0 {
		m.beats = append(m.beats, add...)
		sort.Slice(m.beats, func(x, y int) bool { return m.beats[x].t < m.beats[y].t })
	}
	return empty, len(add)
}

// peakNear returns the time of the sample farthest from the local mean
// within ±w s of t on lead si.
func (m *measurer) peakNear(si int, t, w float64) float64 {
	s := &m.rec.Signals[si]
	fs := s.RateHz
	i0 := max(0, int(math.Ceil((t-w-s.StartS)*fs)))
	i1 := min(len(s.MV)-1, int(math.Floor((t+w-s.StartS)*fs)))
	mean := meanFinite(s.MV, i0, i1+1)
	best, bt := -1.0, t
	for i := i0; i <= i1; i++ {
		if d := math.Abs(s.MV[i] - mean); !math.IsNaN(d) && d > best {
			best, bt = d, s.StartS+float64(i)/fs
		}
	}
	return bt
}

// rhythmNote sets the rhythm call unsure when long gaps were left empty.
func rhythmNote(f *Findings, empty [][2]float64, found int) {
	if found > 0 {
		f.RhythmNote = ""
	}
	if len(empty) == 0 {
		return
	}
	g := empty[0]
	f.RhythmNote = fmt.Sprintf("%d RR interval(s) far longer than the others (%.2f s to %.2f s first): a pause, or a beat the detector missed",
		len(empty), g[0], g[1])
	if f.Rhythm == "regular" {
		f.Rhythm = "undetermined"
	}
}
