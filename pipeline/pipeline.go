package pipeline

import (
	"context"
	"fmt"
	"time"

	"tracelift/axis"
	"tracelift/calib"
	"tracelift/digitize"
	"tracelift/record"
)

// Software names this build in provenance records.
const Software = "tracelift 0.1"

// Caution is shown wherever measurements are shown.
const Caution = axis.Caution

// Options for one run. The zero value uses every default.
type Options struct {
	Load     calib.LoadOptions
	Calib    calib.Options
	Digitize digitize.Options
	Measure  axis.Options
	// ByHand holds settings the user gave by hand; they win over what the
	// page shows (see ByHand).
	ByHand ByHand
	// FindPage searches a document of several pages (a fax with a cover
	// sheet, a PDF) for its first page that holds an ECG instead of
	// reading Load.Page; Outcome.Pages says which page was read and why
	// the ones before it were not.
	FindPage bool
	// Screen, for a page of a document of several pages, looks at the
	// page quickly first (calib.Screen) and refuses it with an error
	// wrapping ErrNoECGPage when it holds no ECG (a cover sheet).
	Screen bool
	// Progress, when set, is told the stage begun and the fraction of the
	// work done (0..1). It is called on the caller's goroutine.
	Progress func(stage string, frac float64)
}

// Outcome holds every stage's result.
type Outcome struct {
	Page      *calib.Page
	Calib     *calib.Result
	Digitized *digitize.Result
	Findings  *axis.Findings
	// MeasureErr says why measuring failed when the tracing itself worked
	// (a strip too short for beats, say); the signals are still exported.
	MeasureErr error
	// Verdict says how far the page can be read (see Judge); set with the
	// findings.
	Verdict Verdict
	Timings Timings
	// Pages says which page of a document of several pages was read and
	// how it was chosen; nil for a single picture.
	Pages *PageChoice
}

// Timings of each stage.
type Timings struct {
	Load, Calib, Digitize, Measure time.Duration
}

// Total returns the sum of the stages.
func (t Timings) Total() time.Duration { return t.Load + t.Calib + t.Digitize + t.Measure }

// Process runs every stage on the image file at path: on the page
// Options.Load names, or, with Options.FindPage, on the first page of a
// document that holds an ECG.
func Process(ctx context.Context, path string, opt Options) (*Outcome, error) {
	if opt.Load.Context == nil {
		opt.Load.Context = ctx
	}
	return processDocument(ctx, path, opt)
}

// ProcessPage runs calibration, tracing and measurement on a loaded page.
func ProcessPage(ctx context.Context, pg *calib.Page, opt Options) (*Outcome, error) {
	o := &Outcome{Page: pg}
	progress := opt.Progress
	if progress == nil {
		progress = func(string, float64) {}
	}
	progress("finding the grid and scale", 0.15)
	t := time.Now()
	cal, err := calib.Detect(ctx, pg, opt.Calib)
	o.Timings.Calib = time.Since(t)
	if err != nil {
		return o, fmt.Errorf("%s: %w", pg.Path, err)
	}
	o.Calib = cal
	if err := checkLooksLikeECG(cal, opt); err != nil {
		return o, fmt.Errorf("%s: %w", pg.Path, err)
	}
	if err := ctx.Err(); err != nil {
		return o, err
	}
	progress("tracing the leads", 0.5)
	t = time.Now()
	dr, err := digitize.Run(ctx, cal, opt.Digitize)
	if err == nil {
		cal = Adopt(o, dr)
		opt.ByHand.apply(cal, dr, opt.Digitize.RateHz)
	}
	o.Timings.Digitize = time.Since(t)
	if err != nil {
		return o, fmt.Errorf("%s: %w", pg.Path, err)
	}
	o.Digitized = dr
	FillProvenance(dr.Record, pg, cal, dr)
	if err := ctx.Err(); err != nil {
		return o, err
	}
	progress("measuring", 0.9)
	o.Remeasure(opt.Measure)
	return o, nil
}

// Remeasure runs the measurement engine again on the current record (after
// a hand correction, say).
func (o *Outcome) Remeasure(opt axis.Options) {
	if o.Digitized == nil || o.Digitized.Record == nil {
		return
	}
	t := time.Now()
	if opt.LeadQuality == nil {
		opt.LeadQuality = map[string]float64{}
		for l, q := range o.Digitized.Quality {
			opt.LeadQuality[l] = q.Confidence
		}
	}
	if !opt.Picture.Digitized && o.Calib != nil {
		model := opt.Picture.Model
		opt.Picture = PictureFacts(o.Calib, o.Digitized)
		opt.Picture.Model = model
	}
	f, err := axis.Measure(o.Digitized.Record, opt)
	o.Timings.Measure = time.Since(t)
	o.Findings, o.MeasureErr = f, err
	o.Verdict = Judge(o.Calib, o.Digitized, f, err)
	if o.Verdict.Level == NotReadable {
		withhold(f)
	}
}

// PictureFacts gathers what the calibration and the tracing know of the
// page for the picture's share of the measurements' uncertainty: the
// scale's source and confidence, whether a pulse was read, whether time 0
// is sure, the limb-law residual, the share of faint and gappy leads
// (the limits the verdict uses), and whether the picture is black and
// white.
func PictureFacts(cal *calib.Result, dr *digitize.Result) axis.Picture {
	p := axis.Picture{Digitized: true}
	if cal != nil {
		p.ScaleConfidence = cal.Confidence
		p.ScaleSource = cal.Source
		p.PulseAssumed = len(cal.Pulses) == 0
		p.Bilevel = cal.Bilevel
	}
	if dr == nil || dr.Record == nil {
		return p
	}
	p.LawResidualUV, _ = worstLaw(dr)
	p.TimeZeroUnsure = dr.TimeZero == digitize.T0Fall
	leads := dr.Record.Leads()
	var faint, gappy int
	for _, l := range leads {
		q := dr.Quality[l]
		if q.Confidence < leadCare {
			faint++
		}
		if q.Coverage < 0.8 {
			gappy++
		}
	}
	if n := len(leads); n > 0 {
		p.FaintShare = float64(faint) / float64(n)
		p.GappyShare = float64(gappy) / float64(n)
	}
	return p
}

// Adopt makes the calibration the page was traced on the outcome's:
// calib's result with the tracing's adjustments carried out
// (digitize.Result.Calib), with the tracing's warnings after calib's
// own, where every reader of the outcome (summary, JSON, PDF, app)
// finds them.
func Adopt(o *Outcome, dr *digitize.Result) *calib.Result {
	cal := dr.Calib
	if cal == nil {
		cal = o.Calib
	}
	cal.Warnings = append(cal.Warnings, dr.Warnings...)
	dr.Calib = cal
	o.Calib = cal
	return cal
}

// FillProvenance records in rec where it came from: the image, its scale and
// settings, the layout, this software.
func FillProvenance(rec *record.Record, pg *calib.Page, cal *calib.Result, dr *digitize.Result) {
	p := &rec.Provenance
	p.SourceFile = pg.Path
	p.ImageSHA256 = pg.SHA256
	p.PxPerMMX = cal.PxPerMMX
	p.PxPerMMY = cal.PxPerMMY
	p.GainMMPerMV = cal.GainMMPerMV
	p.SpeedMMPerS = cal.SpeedMMPerS
	p.Layout = dr.Layout
	p.ScaleSource = cal.Source
	p.GainFrom = cal.GainFrom
	p.SpeedFrom = cal.SpeedFrom
	p.Adjusted = nil
	for _, a := range dr.Adjustments {
		p.Adjusted = append(p.Adjusted, a.Kind)
	}
	p.Software = Software
}
