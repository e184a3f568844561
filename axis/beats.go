package axis

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"tracelift/record"
)

// Errors returned by the beat detector and by Measure.
var (
	ErrNoLead   = errors.New("axis: no usable lead")
	ErrTooShort = errors.New("axis: record too short to measure (need at least 2 s of signal)")
	ErrNoBeats  = errors.New("axis: no beats found")
)

// minRunS is the shortest stretch without gaps the detector works on.
const minRunS = 1.0

// maxBridgeS is the longest gap the detector bridges by a straight line
// (a digitizer's short dropout), rather than splitting the lead there.
const maxBridgeS = 0.1

// bridgeGaps returns x with NaN gaps of at most n samples between two
// recorded samples filled by linear interpolation (x itself when there is
// nothing to fill).
func bridgeGaps(x []float64, n int) []float64 {
	var out []float64
	for i := 0; i < len(x); {
		if !math.IsNaN(x[i]) {
			i++
			continue
		}
		j := i
		for j < len(x) && math.IsNaN(x[j]) {
			j++
		}
		if i > 0 && j < len(x) && j-i <= n {
			if out == nil {
				out = append([]float64(nil), x...)
			}
			a, b := x[i-1], x[j]
			for k := i; k < j; k++ {
				f := float64(k-i+1) / float64(j-i+1)
				out[k] = a*(1-f) + b*f
			}
		}
		i = j
	}
	if out == nil {
		return x
	}
	return out
}

// detection is one QRS complex found on one lead.
type detection struct {
	t    float64 // R fiducial, seconds on the record clock
	run  int     // index of the gap-free stretch it was found in (per lead)
	peak float64 // height of the integrated-energy peak
}

// leadDetections is the detector's output on one lead.
type leadDetections struct {
	lead  string
	beats []detection
	spans [][2]float64 // covered time spans (gap-free runs), seconds
	score float64      // signal/noise peak ratio at the end of the record
	rank  float64      // set by Measure when choosing the beat lead
	agree float64      // share of beats the other leads confirm (Measure)
}

// covers reports whether t lies inside one of the lead's gap-free spans,
// at least margin seconds from its ends.
func (d *leadDetections) covers(t, margin float64) bool {
	for _, sp := range d.spans {
		if t > sp[0]+margin && t < sp[1]-margin {
			return true
		}
	}
	return false
}

// hasBeatNear reports whether the lead has a beat within tol of t.
func (d *leadDetections) hasBeatNear(t, tol float64) bool {
	i := sort.Search(len(d.beats), func(i int) bool { return d.beats[i].t >= t-tol })
	return i < len(d.beats) && d.beats[i].t <= t+tol
}

// DetectBeats finds the QRS complexes of one lead with the Pan–Tompkins
// detector (Pan and Tompkins, IEEE Trans. Biomed. Eng. 32:230–236, 1985):
// 5–15 Hz band-pass, five-point derivative, squaring, 150 ms moving-window
// integration, then adaptive signal and noise thresholds with a 200 ms
// refractory period, a T-wave test on the slope within 360 ms, and a
// search back at 166 % of the mean RR interval. The filters are designed
// for the signal's own rate and run forward and backward (zero phase), so
// the detector works at any rate. Each gap-free stretch of at least 1 s is
// processed on its own. It returns the R-wave times in seconds on the
// record's clock, in increasing order.
func DetectBeats(s *record.Signal) ([]float64, error) {
	d, err := detectLead(s)
	if err != nil {
		return nil, err
	}
	out := make([]float64, len(d.beats))
	for i, b := range d.beats {
		out[i] = b.t
	}
	return out, nil
}

// edgeS is half a normal QRS duration (about 50–60 ms, common practice).
const edgeS = 0.06

// MaxRateHz bounds the sample rate the engine accepts. Electrocardiographs
// sample at 250 Hz to a few kHz, pacemaker-spike detection at up to about
// 32 kHz (from memory); 100 kHz leaves room and keeps every window of the
// detector (rate × seconds) far inside an int.
const MaxRateHz = 100e3

func detectLead(s *record.Signal) (*leadDetections, error) {
	if s == nil || len(s.MV) == 0 {
		return nil, ErrNoLead
	}
	if !(s.RateHz >= 50) || math.IsInf(s.RateHz, 0) {
		return nil, fmt.Errorf("axis: lead %s: sample rate %v Hz is too low to detect beats (need ≥ 50 Hz)", s.Lead, s.RateHz)
	}
	if s.RateHz > MaxRateHz {
		return nil, fmt.Errorf("axis: lead %s: sample rate %g Hz is over the %g Hz this engine reads; check the record's time column or header", s.Lead, s.RateHz, float64(MaxRateHz))
	}
	fs := s.RateHz
	x := bridgeGaps(s.MV, int(maxBridgeS*fs))
	rs := runs(x, int(minRunS*fs))
	if len(rs) == 0 {
		return nil, fmt.Errorf("%w: lead %s has no gap-free stretch of %.0f s", ErrTooShort, s.Lead, minRunS)
	}
	out := &leadDetections{lead: s.Lead}
	var scoreSum, scoreW float64
	for ri, r := range rs {
		idx, score := panTompkins(x[r[0]:r[1]], fs)
		// A complex cut by the edge of a stretch (a printout's column
		// boundary, a gap) has no reliable R fiducial: its peak is where
		// the cut is. Drop detections within edgeS of a cut.
		edge := int(edgeS * fs)
		for _, d := range idx {
			if d.i < edge || d.i >= r[1]-r[0]-edge {
				continue
			}
			out.beats = append(out.beats, detection{t: s.StartS + float64(r[0]+d.i)/fs, run: ri, peak: d.peak})
		}
		w := float64(r[1] - r[0])
		scoreSum += score * w
		scoreW += w
		out.spans = append(out.spans, [2]float64{s.StartS + float64(r[0])/fs, s.StartS + float64(r[1])/fs})
	}
	if scoreW > 0 {
		out.score = scoreSum / scoreW
	}
	return out, nil
}

type ptPeak struct {
	i    int
	peak float64
}

// panTompkins runs the detector on a gap-free stretch and returns the R
// indices and a detection-quality score (final signal peak level over
// noise peak level).
func panTompkins(x []float64, fs float64) ([]ptPeak, float64) {
	n := len(x)
	bp := make([]float64, n)
	var mean float64
	for _, v := range x {
		mean += v
	}
	mean /= float64(n)
	for i, v := range x {
		bp[i] = v - mean
	}
	// Band-pass 5–15 Hz (Pan–Tompkins' pass band).
	butter2(5, fs, true).filtfilt(bp)
	butter2(15, fs, false).filtfilt(bp)

	// Five-point derivative, y = (2x[n+2] + x[n+1] − x[n−1] − 2x[n−2])/8,
	// with the sample spacing scaled to the rate (the original assumes
	// 200 Hz: its points are 5 ms apart; we keep 5 ms spacing).
	k := int(math.Max(1, math.Round(0.005*fs)))
	der := make([]float64, n)
	for i := 2 * k; i < n-2*k; i++ {
		der[i] = (2*bp[i+2*k] + bp[i+k] - bp[i-k] - 2*bp[i-2*k]) / 8
	}
	sq := make([]float64, n)
	for i, v := range der {
		sq[i] = v * v
	}
	mwi := movingAverage(nil, sq, int(math.Round(0.150*fs)))

	// Candidate peaks: maxima of the integrated signal within ±100 ms.
	h := int(math.Round(0.100 * fs))
	var cand []ptPeak
	for i := 1; i < n-1; i++ {
		if !(mwi[i] > mwi[i-1] && mwi[i] >= mwi[i+1]) {
			continue
		}
		ok := true
		for j := max(0, i-h); j <= min(n-1, i+h); j++ {
			if mwi[j] > mwi[i] || (mwi[j] == mwi[i] && j < i) {
				ok = false
				break
			}
		}
		if ok {
			cand = append(cand, ptPeak{i: i, peak: mwi[i]})
		}
	}
	if len(cand) == 0 {
		return nil, 0
	}
	// slope: the largest |derivative| near a candidate, for the T test.
	slope := func(i int) float64 {
		var m float64
		for j := max(0, i-int(0.075*fs)); j <= min(n-1, i+int(0.075*fs)); j++ {
			m = math.Max(m, math.Abs(der[j]))
		}
		return m
	}
	// Learning phase: the first 2 s set the initial levels.
	learn := min(n, int(2*fs))
	var lmax, lmean float64
	for _, v := range mwi[:learn] {
		lmax = math.Max(lmax, v)
		lmean += v
	}
	lmean /= float64(learn)
	spki, npki := 0.6*lmax, 0.5*lmean
	thr1 := npki + 0.25*(spki-npki)

	refr := int(math.Round(0.200 * fs))
	twin := int(math.Round(0.360 * fs))
	var acc []ptPeak
	var accSlope []float64
	rrAvg := func() float64 {
		m := len(acc)
		if m < 3 {
			return 0
		}
		lo := max(1, m-8)
		return float64(acc[m-1].i-acc[lo-1].i) / float64(m-lo)
	}
	accept := func(p ptPeak, w float64) {
		acc = append(acc, p)
		accSlope = append(accSlope, slope(p.i))
		spki = w*p.peak + (1-w)*spki
	}
	// searchBack looks for the largest candidate above the second
	// threshold between the last beat's refractory end and index upto.
	ci := 0 // next candidate to process
	searchBack := func(upto int) {
		if len(acc) == 0 {
			return
		}
		last := acc[len(acc)-1].i
		best := -1
		for j := range cand {
			c := cand[j]
			if c.i <= last+refr || c.i >= upto {
				continue
			}
			if c.peak > 0.5*thr1 && (best < 0 || c.peak > cand[best].peak) {
				best = j
			}
		}
		if best >= 0 {
			accept(cand[best], 0.25)
		}
	}
	for ci < len(cand) {
		c := cand[ci]
		if rr := rrAvg(); rr > 0 && len(acc) > 0 && float64(c.i-acc[len(acc)-1].i) > 1.66*rr {
			before := len(acc)
			searchBack(c.i)
			if len(acc) > before {
				thr1 = npki + 0.25*(spki-npki)
				continue // re-examine c against the new last beat
			}
		}
		ci++
		isQRS := false
		if c.peak > thr1 {
			isQRS = true
			if len(acc) > 0 {
				dt := c.i - acc[len(acc)-1].i
				switch {
				case dt < refr:
					isQRS = false
				case dt < twin && slope(c.i) < 0.5*accSlope[len(accSlope)-1]:
					isQRS = false // T wave
				}
			}
		}
		if isQRS {
			accept(c, 0.125)
		} else {
			npki = 0.125*c.peak + 0.875*npki
		}
		thr1 = npki + 0.25*(spki-npki)
	}
	if rr := rrAvg(); rr > 0 && float64(n-1-acc[len(acc)-1].i) > 1.66*rr {
		searchBack(n)
	}
	// R fiducial: the largest band-passed deflection within ±90 ms of the
	// energy peak (the integrator is centred, so the peak sits on the QRS).
	hw := int(math.Round(0.090 * fs))
	out := make([]ptPeak, 0, len(acc))
	for _, p := range acc {
		bi, bv := p.i, -1.0
		for j := max(0, p.i-hw); j <= min(n-1, p.i+hw); j++ {
			if a := math.Abs(bp[j]); a > bv {
				bi, bv = j, a
			}
		}
		out = append(out, ptPeak{i: bi, peak: p.peak})
	}
	sort.Slice(out, func(a, b int) bool { return out[a].i < out[b].i })
	// Two fiducials closer than the refractory period: keep the stronger.
	ded := out[:0]
	for _, p := range out {
		if m := len(ded); m > 0 && p.i-ded[m-1].i < refr {
			if p.peak > ded[m-1].peak {
				ded[m-1] = p
			}
			continue
		}
		ded = append(ded, p)
	}
	score := 0.0
	if npki > 0 {
		score = spki / npki
	}
	return ded, score
}
