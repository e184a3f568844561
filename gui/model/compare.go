package model

import (
	"context"
	"math"

	"tracelift/record"
)

// Comparison is what the comparison window shows: the tracing on screen
// (the current one) set beside an earlier tracing of the same person. The
// backend builds it from the comparison engine's result; the window only
// lays it out.
type Comparison struct {
	// Earlier and Current name the two tracings with their kind
	// ("old.png, a digitized picture").
	Earlier, Current string
	// Caution comes first on the window and on the printed page.
	Caution string
	// Reversal says, as a likely recording difference, which leads of the
	// current tracing look exchanged against the earlier one's (limb
	// electrodes reversed, two labels swapped); "" when none. The changes
	// are then those of the current tracing with it undone.
	Reversal string
	// Beats are the two representative beats of each lead, QRS onsets at
	// one time.
	Beats []BeatOverlay
	// Raised are the changes beyond their uncertainty that reach the
	// threshold for a change worth attention; Listed those beyond their
	// uncertainty that are not raised (under the threshold, explained by
	// a gain or axis shift, or withheld on a doubtful trace), each saying
	// why.
	Raised, Listed []ChangeLine
	// Within counts the items inside their uncertainty, Unmeasured those
	// not measured on both tracings.
	Within, Unmeasured int
	// Notes are the engine's notes: the beats' shift and gain, clock
	// spread, digitization allowance.
	Notes []string
	// FileStem names the comparison's files as the command line does
	// ("<earlier>-vs-<current>").
	FileStem string
	// Handle is the backend's own result, for printing.
	Handle any
}

// BeatOverlay is one lead's two representative beats on one clock:
// sample k is at T0MS + k·StepMS ms from the QRS onset; NaN where a beat
// has no sample. Amplitudes in mV.
type BeatOverlay struct {
	Lead             string
	T0MS, StepMS     float64
	Earlier, Current []float64
	// ShiftMS is the current beat's lag against the earlier one, Gain its
	// QRS over the earlier one's, Corr their correlation; NaN when
	// unknown.
	ShiftMS, Gain, Corr float64
}

// Aligned reports whether the overlay has its shift and gain.
func (b BeatOverlay) Aligned() bool {
	return !math.IsNaN(b.ShiftMS) && !math.IsNaN(b.Gain) && !math.IsNaN(b.Corr)
}

// ChangeLine is one compared item as listed.
type ChangeLine struct {
	// Text is the change with both values, the difference and its 90 %
	// uncertainty, in the engine's words.
	Text string
	// Uncertainty is the difference's 90 % half-width with its unit.
	Uncertainty string
	// Threshold is the rule a change must reach to be raised, Source
	// where its figure comes from.
	Threshold, Source string
	Raised            bool
	// Why says why a listed change is not raised ("" for a raised one).
	Why string
}

// Current is the tracing on screen as a comparison takes it: the record
// after the corrections, its findings, the per-lead confidence.
type Current struct {
	Name    string
	Record  *record.Record
	Summary *Summary
	// Quality is the tracing confidence per lead of the record (0..1).
	Quality map[string]float64
	// Digitized is true when the record was traced from a picture.
	Digitized bool
}

// Comparer compares the tracing on screen with an earlier one and prints
// the comparison. The real one wraps package compare and report's
// comparison page; the backend given to the app may implement it.
type Comparer interface {
	// CompareWith reads the earlier tracing (a picture, a record file or
	// a JSON written by digitize) and compares cur against it. It
	// honours ctx.
	CompareWith(ctx context.Context, earlier Source, cur Current, p Progress) (*Comparison, error)
	// PrintComparison writes the one-page PDF of c to path, or, when a
	// file is there already, to a new name beside it; it returns the file
	// written. paper is "a4" or "letter".
	PrintComparison(c *Comparison, path, paper string) (string, error)
}

// Current returns the tracing on screen for a comparison; ok is false
// when nothing is open or it could not be measured.
func (m *Model) Current() (Current, bool) {
	if m.a == nil || m.rec == nil || m.sum == nil {
		return Current{}, false
	}
	name := m.src.Name
	if m.src.Path != "" {
		name = baseName(m.src.Path)
	}
	q := make(map[string]float64, len(m.quality))
	for l, v := range m.quality {
		q[l] = v
	}
	return Current{Name: name, Record: m.rec, Summary: m.sum, Quality: q, Digitized: true}, true
}

// BeatSpan returns the amplitude window in mV that holds every sample of
// the overlaid beats, widened to whole half millivolts (one 5 mm major
// square at 10 mm/mV) with a quarter millivolt of room, and to at least
// −1 … +1 mV, so that every lead is
// drawn at one scale.
func BeatSpan(beats []BeatOverlay) (lo, hi float64) {
	lo, hi = -1, 1
	for _, b := range beats {
		for _, x := range [][]float64{b.Earlier, b.Current} {
			for _, v := range x {
				if !math.IsNaN(v) && !math.IsInf(v, 0) {
					lo, hi = math.Min(lo, v), math.Max(hi, v)
				}
			}
		}
	}
	// Limit a wild sample (a trace lost off the paper) to ±5 mV.
	lo, hi = math.Max(lo, -5), math.Min(hi, 5)
	// A quarter millivolt of room beyond the extremes keeps a peak off
	// the box's edge.
	return math.Floor((lo-0.25)*2) / 2, math.Ceil((hi+0.25)*2) / 2
}

// BeatGrid chooses how many columns n lead boxes, each boxW × boxH mm with
// gap mm between them, take in an area w × h (any unit) so that they are
// drawn largest at one scale; it returns the columns and the scale in
// units per mm (0 when nothing fits).
func BeatGrid(n int, w, h, boxW, boxH, gap float64) (cols int, perMM float64) {
	if n <= 0 || !(w > 0) || !(h > 0) || !(boxW > 0) || !(boxH > 0) {
		return 1, 0
	}
	cols = 1
	for c := 1; c <= n; c++ {
		rows := (n + c - 1) / c
		k := math.Min(w/(float64(c)*(boxW+gap)), h/(float64(rows)*(boxH+gap)))
		if k > perMM {
			cols, perMM = c, k
		}
	}
	return cols, perMM
}
