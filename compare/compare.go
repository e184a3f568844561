package compare

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"tracelift/axis"
	"tracelift/record"
)

// Caution is carried by every page and file that shows a comparison.
const Caution = "A comparison of two digitized tracings is no diagnosis: lead placement, filters and posture change tracings too. " + axis.Caution

// Side is one of the two tracings compared.
type Side struct {
	Label  string         `json:"label"`
	Record *record.Record `json:"-"`
	// Findings of Record; nil has Compare measure it.
	Findings *axis.Findings `json:"-"`
	// Quality is the per-lead digitization confidence in 0..1 (the
	// digitizer's); nil for a record read from a file.
	Quality map[string]float64 `json:"quality,omitempty"`
	// Digitized is true when Record was traced from a picture.
	Digitized bool `json:"digitized"`
}

// Options tune Compare. The zero value uses every default.
type Options struct {
	// Uncertainty gives each side's 90 % half-width of a value; nil is
	// DefaultUncertainty.
	Uncertainty UncertaintyFunc
	// NoExchange turns off the search for reversed electrodes and
	// exchanged labels.
	NoExchange bool
}

// Change is one item compared between the two tracings. Before is the
// earlier tracing (A), After the current one (B).
type Change struct {
	Item   string   `json:"item"`
	Lead   string   `json:"lead,omitempty"`
	Unit   string   `json:"unit"`
	Before axis.Num `json:"before"`
	After  axis.Num `json:"after"`
	Delta  axis.Num `json:"delta"`
	// UBefore, UAfter: each side's 90 % half-width; U the difference's,
	// √(UBefore² + UAfter²) (the two sides taken as independent).
	UBefore axis.Num `json:"u90_before"`
	UAfter  axis.Num `json:"u90_after"`
	U       axis.Num `json:"u90_delta"`
	// Beyond is true when |Delta| exceeds U.
	Beyond bool `json:"beyond_uncertainty"`
	// Raised is true when the change is beyond its uncertainty, reaches
	// the threshold and is not explained by a recording difference.
	Raised bool   `json:"raised"`
	Kind   string `json:"kind,omitempty"`
	// ExplainedBy names what accounts for a change that would otherwise
	// be raised: "qrs_axis" or "t_axis" (the limb lead follows the frontal
	// axis shift), "gain" (a common gain factor).
	ExplainedBy string `json:"explained_by,omitempty"`
	Message     string `json:"message"`
	Threshold   string `json:"threshold,omitempty"` // the rule, see Thresholds for the source
}

// Alignment is how one lead's two representative beats line up once both
// QRS onsets are put at time 0.
type Alignment struct {
	Lead string `json:"lead"`
	// ShiftMS is the lag of B's beat against A's that fits best (±40 ms).
	ShiftMS float64 `json:"shift_ms"`
	// Gain is B's QRS over A's (least squares at that lag).
	Gain float64 `json:"gain"`
	// Corr is the correlation of the two beats at that lag.
	Corr float64 `json:"corr"`
	// Distance is the RMS difference over the mean RMS of the two beats.
	Distance float64 `json:"distance"`
}

// Exchange reports leads of B that look reversed or mislabelled against
// A's.
type Exchange struct {
	Name string `json:"name"`
	Text string `json:"text"`
	// DistanceAsIs and DistanceUndone are the mean distances (see
	// Alignment.Distance) of the leads involved, before and after undoing
	// the exchange.
	DistanceAsIs   float64  `json:"distance_as_is"`
	DistanceUndone float64  `json:"distance_undone"`
	Leads          []string `json:"leads"`
}

// BeatPair is one lead's two representative beats on one clock: sample k
// is at T0MS + k·2 ms from the QRS onset; NaN where a beat has no sample.
type BeatPair struct {
	Lead   string    `json:"lead"`
	T0MS   float64   `json:"t0_ms"`
	StepMS float64   `json:"step_ms"`
	A      []float64 `json:"-"`
	B      []float64 `json:"-"`
}

// Result is the comparison of two tracings.
type Result struct {
	Before    Side        `json:"before"`
	After     Side        `json:"after"`
	Alignment []Alignment `json:"alignment"`
	// GainFactor is the median of the leads' gains; GainMismatch is set
	// when it points to the two tracings being printed or read at
	// different gains.
	GainFactor   axis.Num `json:"gain_factor"`
	GainMismatch bool     `json:"gain_mismatch"`
	// ClockSpreadMS is the range of the leads' shifts (leads whose beats
	// correlate over 0.8): near 0 when both tracings put every lead on
	// one clock, tens of ms when one tracing's columns sit apart in time,
	// which moves the fiducials against some leads.
	ClockSpreadMS float64 `json:"clock_spread_ms"`
	// Exchange is set when B's leads look reversed or mislabelled
	// against A's; the changes are then those of B with it undone.
	Exchange *Exchange `json:"likely_exchange,omitempty"`
	Changes  []Change  `json:"changes"`
	Raised   int       `json:"raised"`
	Notes    []string  `json:"notes,omitempty"`
	Caution  string    `json:"caution"`
	// Beats holds the overlaid beats for drawing; FindingsA/B the
	// findings compared (B's after an exchange was undone).
	Beats     []BeatPair     `json:"-"`
	FindingsA *axis.Findings `json:"-"`
	FindingsB *axis.Findings `json:"-"`
}

// RaisedChanges returns the raised changes.
func (r *Result) RaisedChanges() []Change {
	var out []Change
	for _, c := range r.Changes {
		if c.Raised {
			out = append(out, c)
		}
	}
	return out
}

// ErrNothingInCommon is returned when the two tracings share no lead
// with a measured beat.
var ErrNothingInCommon = errors.New("compare: the two tracings have no lead with a measured beat in common")

// Compare compares b (the current tracing) against a (the earlier one).
func Compare(a, b Side, opt Options) (*Result, error) {
	if opt.Uncertainty == nil {
		opt.Uncertainty = DefaultUncertainty
	}
	for _, s := range []*Side{&a, &b} {
		if s.Record == nil {
			return nil, fmt.Errorf("compare: %s: no record", s.Label)
		}
		if err := s.Record.Validate(); err != nil {
			return nil, fmt.Errorf("compare: %s: %w", s.Label, err)
		}
		if s.Findings == nil || len(s.Findings.Templates) == 0 {
			f, err := axis.Measure(s.Record, axis.Options{LeadQuality: s.Quality})
			if err != nil {
				return nil, fmt.Errorf("compare: %s: %w", s.Label, err)
			}
			s.Findings = f
		}
	}
	res := &Result{Before: a, After: b, Caution: Caution, GainFactor: axis.NaN()}
	beatsA, beatsB := onsetBeats(a.Findings), onsetBeats(b.Findings)
	if !opt.NoExchange {
		if ex, e := findExchange(beatsA, beatsB); ex != nil {
			rec := ex.apply(b.Record)
			q := ex.applyQuality(b.Quality)
			f, err := axis.Measure(rec, axis.Options{LeadQuality: q})
			if err == nil {
				res.Exchange = e
				b.Record, b.Quality, b.Findings = rec, q, f
				res.After = b
				beatsB = onsetBeats(f)
			} else {
				res.Notes = append(res.Notes, fmt.Sprintf("%s; measuring it undone failed (%v), so it is compared as recorded", e.Text, err))
			}
		}
	}
	res.FindingsA, res.FindingsB = a.Findings, b.Findings
	res.Beats = pairs(beatsA, beatsB)
	if len(res.Beats) == 0 {
		return nil, ErrNothingInCommon
	}
	res.align()
	c := &comparer{a: &a, b: &b, opt: opt, res: res}
	c.global()
	c.leads()
	c.explain(beatsA)
	for _, ch := range res.Changes {
		if ch.Raised {
			res.Raised++
		}
	}
	if a.Digitized || b.Digitized {
		res.Notes = append(res.Notes, "uncertainties include this package's allowance for digitization (see compare.DigitizationTerm)")
	}
	return res, nil
}

// onsetBeats returns each lead's representative beat of f on the gridHz
// grid from onsetPreMS before its QRS onset to onsetPostMS after it.
func onsetBeats(f *axis.Findings) map[string][]float64 {
	out := map[string][]float64{}
	if f == nil || !f.Fiducials.QRSOn.OK() {
		return out
	}
	on := float64(f.Fiducials.QRSOn) / gridMS
	n := int((onsetPostMS+onsetPreMS)/gridMS) + 1
	for _, t := range f.Templates {
		x, r0 := template(f, t.Lead)
		if x == nil {
			continue
		}
		b := make([]float64, n)
		for k := range b {
			j := r0 + int(math.Round(on)) + k - int(onsetPreMS/gridMS)
			b[k] = math.NaN()
			if j >= 0 && j < len(x) {
				b[k] = x[j]
			}
		}
		out[t.Lead] = b
	}
	return out
}

// The span of the overlaid beats around the QRS onset.
const (
	onsetPreMS  = 300.0
	onsetPostMS = 600.0
)

func pairs(a, b map[string][]float64) []BeatPair {
	var out []BeatPair
	for _, l := range orderedLeads(a) {
		if b[l] == nil {
			continue
		}
		out = append(out, BeatPair{Lead: l, T0MS: -onsetPreMS, StepMS: gridMS, A: a[l], B: b[l]})
	}
	return out
}

// orderedLeads returns the keys of m, standard leads first in their order.
func orderedLeads(m map[string][]float64) []string {
	var out []string
	for _, l := range record.Standard12 {
		if _, ok := m[l]; ok {
			out = append(out, l)
		}
	}
	var rest []string
	for l := range m {
		if !record.IsStandard(l) {
			rest = append(rest, l)
		}
	}
	sort.Strings(rest)
	return append(out, rest...)
}

// fit compares two beats over [lo, hi) with b moved by sh samples:
// correlation, least-squares gain of b on a, and the distance.
func fit(a, b []float64, lo, hi, sh int) (corr, gain, dist float64, n int) {
	var sa, sb, saa, sbb, sab float64
	for k := lo; k < hi; k++ {
		j := k + sh
		if k < 0 || k >= len(a) || j < 0 || j >= len(b) {
			continue
		}
		x, y := a[k], b[j]
		if math.IsNaN(x) || math.IsNaN(y) {
			continue
		}
		sa += x
		sb += y
		saa += x * x
		sbb += y * y
		sab += x * y
		n++
	}
	if n < 10 {
		return math.NaN(), math.NaN(), math.NaN(), n
	}
	c := float64(n)
	den := math.Sqrt((saa - sa*sa/c) * (sbb - sb*sb/c))
	corr = 0
	if den > 0 {
		corr = (sab - sa*sb/c) / den
	}
	gain = math.NaN()
	if saa > 0 {
		gain = sab / saa
	}
	dist = math.NaN()
	if saa+sbb > 0 {
		dist = math.Sqrt(math.Max(0, saa+sbb-2*sab) / ((saa + sbb) / 2))
	}
	return corr, gain, dist, n
}

// bestFit searches the lag within ±maxMS that correlates best.
func bestFit(a, b []float64, lo, hi int, maxMS float64) (sh int, corr, gain, dist float64) {
	m := int(maxMS / gridMS)
	corr = math.Inf(-1)
	sh = 0
	gain, dist = math.NaN(), math.NaN()
	for s := -m; s <= m; s++ {
		c, g, d, _ := fit(a, b, lo, hi, s)
		if !math.IsNaN(c) && c > corr {
			sh, corr, gain, dist = s, c, g, d
		}
	}
	if math.IsInf(corr, -1) {
		corr = math.NaN()
	}
	return sh, corr, gain, dist
}

// qrsWindow is the part of the onset-aligned beats the alignment and the
// exchange search look at: from 40 ms before the onset to 400 ms after
// (QRS, ST and most of T).
func qrsWindow() (lo, hi int) {
	return int((onsetPreMS - 40) / gridMS), int((onsetPreMS + 400) / gridMS)
}

func (r *Result) align() {
	lo, hi := qrsWindow()
	qhi := int((onsetPreMS + 120) / gridMS)
	var gains []float64
	shLo, shHi := math.Inf(1), math.Inf(-1)
	for _, p := range r.Beats {
		sh, corr, _, dist := bestFit(p.A, p.B, lo, hi, 40)
		if corr > 0.8 {
			shLo, shHi = math.Min(shLo, float64(sh)*gridMS), math.Max(shHi, float64(sh)*gridMS)
		}
		_, g, _, _ := fit(p.A, p.B, lo, qhi, sh)
		r.Alignment = append(r.Alignment, Alignment{Lead: p.Lead, ShiftMS: float64(sh) * gridMS, Gain: g, Corr: corr, Distance: dist})
		if !math.IsNaN(g) && corr > 0.8 && peakToPeak(p.A[lo:qhi]) >= 0.5 {
			gains = append(gains, g)
		}
	}
	if shHi >= shLo {
		r.ClockSpreadMS = shHi - shLo
		// 10 ms: five samples, more than the alignment of two readings of
		// one simultaneous record moves (0 to 4 ms on the test records).
		if r.ClockSpreadMS >= 10 {
			r.Notes = append(r.Notes, fmt.Sprintf("the leads' beats line up only with shifts spread over %.0f ms: one tracing's columns may sit apart in time, which moves its fiducials against some leads; the axes are given a wider interval for it", r.ClockSpreadMS))
		}
	}
	if len(gains) < 3 {
		return
	}
	sort.Float64s(gains)
	med := gains[len(gains)/2]
	r.GainFactor = axis.Num(med)
	q1, q3 := gains[len(gains)/4], gains[(3*len(gains))/4]
	// A common factor outside 0.8..1.25, with the leads agreeing on it
	// within 15 %, points to a gain setting (10 against 20 or 5 mm/mV) or
	// a scale misread rather than to the heart (this package's rule).
	if (med < 0.8 || med > 1.25) && (q3-q1)/med < 0.15 {
		r.GainMismatch = true
		r.Notes = append(r.Notes, fmt.Sprintf("every lead of B is about %.2f times A's: the two tracings may have been printed or read at different gains; check the mm/mV of both", med))
	}
}

func peakToPeak(x []float64) float64 {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range x {
		if !math.IsNaN(v) {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	if math.IsInf(lo, 0) {
		return 0
	}
	return hi - lo
}

// findExchange looks for reversed limb electrodes or two exchanged lead
// labels in b against a. An exchange is taken as likely when the leads it
// involves differ from a's as recorded (mean distance over 0.3) and match
// once it is undone (mean distance under 0.35 and under half the
// distance as recorded): a change of the heart seldom turns one lead into
// another. The figures are this package's, set between the distances of
// one person's tracings read twice (under 0.3 on the test records) and of
// different leads.
func findExchange(a, b map[string][]float64) (*exchange, *Exchange) {
	lo, hi := qrsWindow()
	dist := func(x, y []float64, sign float64) float64 {
		if sign < 0 {
			y = negated(y)
		}
		_, _, _, d := bestFit(x, y, lo, hi, 20)
		return d
	}
	cands := append(append([]exchange(nil), electrodeExchanges...), labelSwaps()...)
	var best *exchange
	var bestRep *Exchange
	bestGain := 0.0
	for i := range cands {
		e := cands[i]
		if !e.covers(a, b) {
			continue
		}
		var asIs, undone float64
		var leads []string
		for _, l := range orderedLeads(toSet(e.From)) {
			src := e.From[l]
			asIs += dist(a[l], b[l], 1)
			undone += dist(a[l], b[src.Lead], src.Sign)
			leads = append(leads, l)
		}
		n := float64(len(leads))
		asIs, undone = asIs/n, undone/n
		if math.IsNaN(asIs) || math.IsNaN(undone) {
			continue
		}
		if !(asIs > 0.3 && undone < 0.35 && undone < 0.5*asIs) {
			continue
		}
		if g := (asIs - undone) * n; g > bestGain {
			bestGain = g
			best = &cands[i]
			bestRep = &Exchange{Name: e.Name, Text: e.Text, DistanceAsIs: asIs, DistanceUndone: undone, Leads: leads}
		}
	}
	return best, bestRep
}

func toSet(m map[string]source) map[string][]float64 {
	out := map[string][]float64{}
	for l := range m {
		out[l] = nil
	}
	return out
}

func negated(x []float64) []float64 {
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = -v
	}
	return out
}
