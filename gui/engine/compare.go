package engine

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"tracelift/axis"
	"tracelift/compare"
	"tracelift/gui/model"
	"tracelift/pipeline"
	"tracelift/record/atomic"
	"tracelift/report"
)

// ComparePDFWriter draws a comparison on one page of paper; report.ComparePDF
// is the one the app uses.
type ComparePDFWriter func(w io.Writer, r *compare.Result, paper string) error

// CompareError is a comparison that could not be made, naming the earlier
// tracing.
type CompareError struct {
	Earlier string // the earlier tracing's file
	Err     error
}

func (e *CompareError) Error() string { return filepath.Base(e.Earlier) + ": " + e.Err.Error() }
func (e *CompareError) Unwrap() error { return e.Err }

// CompareWith reads the earlier tracing through the pipeline's one reader
// of tracings (pipeline.ReadTracing: a picture digitized with the base
// options, a record file, a JSON written by digitize with its CSV) and
// compares the tracing on screen against it (compare.Compare, the current
// tracing as B).
func (b *Backend) CompareWith(ctx context.Context, earlier model.Source, cur model.Current, p model.Progress) (*model.Comparison, error) {
	if cur.Record == nil {
		return nil, errors.New("engine: there is no tracing on screen to compare")
	}
	if earlier.Path == "" {
		return nil, errors.New("engine: the earlier tracing must be a file")
	}
	opt := b.Options
	if p != nil {
		opt.Progress = p
	}
	t, err := pipeline.ReadTracing(ctx, earlier.Path, opt)
	if err != nil {
		return nil, &CompareError{Earlier: earlier.Path, Err: err}
	}
	var f *axis.Findings
	if cur.Summary != nil {
		f, _ = cur.Summary.Detail.(*axis.Findings)
	}
	a := compare.Side{Label: t.Label, Record: t.Record, Findings: t.Findings, Quality: t.Quality, Digitized: t.Digitized}
	c := compare.Side{Label: cur.Name, Record: cur.Record, Findings: f, Quality: cur.Quality, Digitized: cur.Digitized}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	r, err := compare.Compare(a, c, compare.Options{})
	if err != nil {
		return nil, &CompareError{Earlier: earlier.Path, Err: err}
	}
	v := ComparisonView(r)
	v.FileStem = pipeline.Stem(earlier.Path) + "-vs-" + pipeline.Stem(cur.Name)
	return v, nil
}

// ComparisonView puts the comparison engine's result into what the
// comparison window shows: the caution, the two sides, a likely reversal,
// the overlaid beats with their shift and gain, the raised changes and
// then the listed ones, each with its uncertainty and threshold.
func ComparisonView(r *compare.Result) *model.Comparison {
	v := &model.Comparison{
		Earlier: sideWords(r.Before),
		Current: sideWords(r.After),
		Caution: r.Caution,
		Handle:  r,
	}
	if r.Exchange != nil {
		v.Reversal = "Likely recording difference, not a change of the heart: " + r.Exchange.Text +
			". The current tracing is compared, and its beats drawn, with it undone."
	}
	al := map[string]compare.Alignment{}
	for _, a := range r.Alignment {
		al[a.Lead] = a
	}
	for _, bp := range r.Beats {
		o := model.BeatOverlay{Lead: bp.Lead, T0MS: bp.T0MS, StepMS: bp.StepMS, Earlier: bp.A, Current: bp.B,
			ShiftMS: math.NaN(), Gain: math.NaN(), Corr: math.NaN()}
		if a, ok := al[bp.Lead]; ok {
			o.ShiftMS, o.Gain, o.Corr = a.ShiftMS, a.Gain, a.Corr
		}
		v.Beats = append(v.Beats, o)
	}
	for _, ch := range r.Changes {
		switch {
		case ch.Raised:
			v.Raised = append(v.Raised, changeLine(ch))
		case ch.Beyond:
			v.Listed = append(v.Listed, changeLine(ch))
		case ch.Delta.OK():
			v.Within++
		default:
			v.Unmeasured++
		}
	}
	for _, n := range r.Notes {
		// The engine's note names its own code; the window says it plainly.
		n = strings.ReplaceAll(n, "this package's allowance for digitization (see compare.DigitizationTerm)", "an allowance for the error of reading a picture")
		v.Notes = append(v.Notes, upperFirst(n))
	}
	if r.GainFactor.OK() {
		v.Notes = append(v.Notes, fmt.Sprintf("Median gain of the current tracing against the earlier one over the leads: %.2f.", float64(r.GainFactor)))
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, a := range r.Alignment {
		if a.Corr > 0.8 { // the leads compare's own clock spread counts
			lo, hi = math.Min(lo, a.ShiftMS), math.Max(hi, a.ShiftMS)
		}
	}
	if hi >= lo {
		v.Notes = append(v.Notes, fmt.Sprintf("The current beats lag the earlier ones by %+.0f to %+.0f ms once both QRS onsets are put at one time (leads whose beats correlate over 0.8).", lo, hi))
	}
	return v
}

func upperFirst(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

func sideWords(s compare.Side) string {
	if s.Digitized {
		return s.Label + ", a digitized picture"
	}
	return s.Label + ", a record file"
}

func changeLine(ch compare.Change) model.ChangeLine {
	text, withheld, _ := strings.Cut(ch.Message, "; not raised: ")
	l := model.ChangeLine{Text: text, Threshold: ch.Threshold, Raised: ch.Raised}
	item := ch.Item
	if item == compare.ItemQDur { // the Q wave's rule holds its duration too
		item = compare.ItemQ
	}
	if th, ok := compare.Thresholds[item]; ok {
		if l.Threshold == "" {
			l.Threshold = th.Rule
		}
		l.Source = th.Source
	}
	if ch.U.OK() {
		prec := 0
		switch ch.Unit {
		case "mV":
			prec = 2
		case "positions":
			prec = 1
		}
		l.Uncertainty = fmt.Sprintf("± %.*f %s (90 %%)", prec, float64(ch.U), ch.Unit)
	}
	if !ch.Raised {
		switch ch.ExplainedBy {
		case "":
			l.Why = "not raised: under the threshold"
		case "gain":
			l.Why = "not raised: explained by a common gain factor of the two tracings"
		case compare.ItemQRSAxis, compare.ItemPAxis, compare.ItemTAxis:
			l.Why = "not raised: follows the shift of the frontal " + strings.ToUpper(strings.TrimSuffix(ch.ExplainedBy, "_axis")) + " axis"
		default:
			l.Why = "not raised: " + strings.ReplaceAll(ch.ExplainedBy, "_", " ")
			if withheld != "" {
				l.Why = "not raised: " + withheld
			}
		}
	}
	return l
}

// PrintComparison writes the comparison page (report.ComparePDF unless
// the backend was given another writer) to path. A file already there is
// never replaced: the page goes to the first free name beside it
// ("name-2.pdf", …), claimed before it is written. It returns the file
// written.
func (b *Backend) PrintComparison(c *model.Comparison, path, paper string) (string, error) {
	if c == nil {
		return "", errors.New("engine: no comparison to print")
	}
	r, ok := c.Handle.(*compare.Result)
	if !ok || r == nil {
		return "", errors.New("engine: no comparison to print")
	}
	if paper == "" {
		paper = "a4"
	}
	if _, err := report.PaperByName(paper); err != nil {
		return "", err
	}
	write := b.ComparePDF
	if write == nil {
		write = report.ComparePDF
	}
	dst, err := claimFree(path)
	if err != nil {
		return "", err
	}
	err = atomic.WriteFile(dst, func(w io.Writer) error { return write(w, r, paper) }, 0o644)
	if err != nil {
		os.Remove(dst) // the empty file claimed above, ours
		return "", err
	}
	return dst, nil
}

// claimFree creates an empty file at path, or at the first of
// "stem-2.ext", "stem-3.ext", … that does not exist, and returns its name:
// creating it exclusively means no file that was there is replaced.
func claimFree(path string) (string, error) {
	ext := filepath.Ext(path)
	stem := strings.TrimSuffix(path, ext)
	for k := 1; k <= 999; k++ {
		p := path
		if k > 1 {
			p = fmt.Sprintf("%s-%d%s", stem, k, ext)
		}
		f, err := os.OpenFile(p, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
		if errors.Is(err, os.ErrExist) {
			continue
		}
		if err != nil {
			return "", err
		}
		f.Close()
		return p, nil
	}
	return "", fmt.Errorf("engine: %s and 998 names beside it are taken; choose another name", filepath.Base(path))
}
