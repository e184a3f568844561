// Package engine connects the app's model to the real pipeline: reading a
// printout through the pipeline's run path (pipeline.ProcessPage),
// re-deriving signals after a box move, measuring (axis) and exporting what
// the screen shows (pipeline.Export, with report's PDF writer). It has no
// fyne import.
package engine

import (
	"context"
	"errors"
	"fmt"
	"image"
	"math"
	"sync"

	"github.com/disintegration/imaging"

	"tracelift/axis"
	"tracelift/calib"
	"tracelift/digitize"
	"tracelift/gui/model"
	"tracelift/pipeline"
	"tracelift/record"
	"tracelift/report"
	"tracelift/samples"
)

// Layouts the user may choose on the Reading tab (record.Layouts).
var Layouts = func() []string {
	out := make([]string, len(record.Layouts))
	for i, l := range record.Layouts {
		out[i] = string(l)
	}
	return out
}()

// Backend is the pipeline behind the model.
type Backend struct {
	Options pipeline.Options // base options; the user's settings go on top
	// ExportOptions for the writers; the PDF writer defaults to report.Write.
	ExportOptions pipeline.ExportOptions

	mu   sync.Mutex
	last *state // the page last analysed, for the page's verdict
}

// state is what the model carries opaquely for us.
type state struct {
	o *pipeline.Outcome // as read, before any correction
}

// Demo returns the default embedded demo printout as a source.
func Demo() (model.Source, error) {
	d := samples.DefaultDemo()
	if len(d.Data) == 0 {
		return model.Source{}, errors.New("engine: this build has no demo printout")
	}
	return model.Source{Name: d.Name, Data: d.Data}, nil
}

// Analyze reads the source with the user's settings on top of the base
// options, through the pipeline's one run path (pipeline.ProcessPage).
func (b *Backend) Analyze(ctx context.Context, src model.Source, s model.Settings, p model.Progress) (*model.Analysis, error) {
	opt := b.Options
	if s.PxPerMM > 0 {
		opt.Calib.UserPxPerMM, opt.Calib.ForceUser = s.PxPerMM, true
	}
	// Typed gain and speed are the user's decision: they win over the
	// page's pulses and printed text.
	if s.GainMMPerMV > 0 {
		opt.ByHand.GainMMPerMV = s.GainMMPerMV
	}
	if s.SpeedMMPerS > 0 {
		opt.ByHand.SpeedMMPerS = s.SpeedMMPerS
	}
	if s.Layout != "" {
		opt.Digitize.Layout = s.Layout
	}
	opt.Load.Page = s.Page
	if p == nil {
		p = func(string, float64) {}
	}
	opt.Progress = p
	p("opening", 0.02)
	var pg *calib.Page
	var err error
	if src.Path != "" {
		pg, err = calib.Load(src.Path, opt.Load)
	} else {
		pg, err = calib.Decode(src.Data, src.Name, opt.Load)
	}
	if err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	pg.Image = Orient(pg.Image, s.QuarterTurns, s.Mirror)
	o, err := pipeline.ProcessPage(ctx, pg, opt)
	if err != nil {
		return nil, err
	}
	cal, dr := o.Calib, o.Digitized
	a := &model.Analysis{
		Name: src.Name, ImageSHA256: pg.SHA256,
		Image: cal.Rectified, PxPerMM: cal.PxPerMM, ImagePxPerMM: cal.PxPerMMX,
		GainMMPerMV: cal.GainMMPerMV, SpeedMMPerS: cal.SpeedMMPerS,
		ScaleSource: cal.Source, ScaleConf: cal.Confidence,
		Layout: dr.Layout, Layouts: Layouts,
		Quality:   map[string]float64{},
		Raw:       dr.Record,
		Warnings:  cal.Warnings,
		PageCount: max(pg.PageCount, 1),
		Handle:    &state{o: o},
	}
	b.mu.Lock()
	b.last = a.Handle.(*state)
	b.mu.Unlock()
	if a.Name == "" {
		a.Name = pg.Path
	}
	for _, pn := range dr.Panels {
		a.Panels = append(a.Panels, model.Panel{Lead: pn.Lead, Row: pn.Row, Col: pn.Col, Rhythm: pn.Rhythm,
			Box: pn.Box, BaselineY: pn.BaselineY, T0S: pn.T0S, T1S: pn.T1S})
	}
	// Quality is per standard lead; the model keys it by printed name.
	for _, pn := range dr.Panels {
		name := pn.Lead
		std := record.CanonicalLead(trimSign(name))
		if q, ok := dr.Quality[std]; ok {
			a.Quality[name] = q.Confidence
		} else if q, ok := dr.Quality[name]; ok {
			a.Quality[name] = q.Confidence
		}
	}
	return a, nil
}

// Orient turns img by quarter turns clockwise (any integer; taken modulo
// 4) and then mirrors it left to right when mirror is set: a sideways fax
// or a scan made through the back of the sheet.
func Orient(img image.Image, quarterTurns int, mirror bool) image.Image {
	q := ((quarterTurns % 4) + 4) % 4
	if q == 0 && !mirror {
		return img
	}
	var out *image.NRGBA
	switch q {
	case 1:
		out = imaging.Rotate270(img) // imaging turns counter-clockwise
	case 2:
		out = imaging.Rotate180(img)
	case 3:
		out = imaging.Rotate90(img)
	}
	if mirror {
		if out != nil {
			out = imaging.FlipH(out)
		} else {
			out = imaging.FlipH(img)
		}
	}
	return out
}

func trimSign(s string) string {
	if len(s) > 0 && s[0] == '-' {
		return s[1:]
	}
	if len(s) >= 3 && s[:3] == "−" {
		return s[3:]
	}
	return s
}

// Resignal re-derives the signals with the moved panels: each trace is
// cut to its panel's new box (columns outside become gaps, points above
// or below the box too) and turned into mV again by digitize.Signals.
func (b *Backend) Resignal(a *model.Analysis, panels []model.Panel) (*record.Record, []model.Panel, error) {
	st, ok := a.Handle.(*state)
	if !ok || st == nil {
		return nil, nil, errors.New("engine: the reading is incomplete")
	}
	dr, cal := st.o.Digitized, st.o.Calib
	if len(panels) != len(dr.Panels) {
		return nil, nil, fmt.Errorf("engine: %d panels given, the reading has %d", len(panels), len(dr.Panels))
	}
	dp := make([]digitize.Panel, len(panels))
	for i, p := range panels {
		dp[i] = dr.Panels[i]
		dp[i].Box, dp[i].BaselineY = p.Box, p.BaselineY
	}
	trs := make([]digitize.Trace, len(dr.Traces))
	for i, tr := range dr.Traces {
		c := tr
		c.Y = append([]float64(nil), tr.Y...)
		// A moved box cuts its trace to the box's new time span. The
		// trace may stray above or below its box (printers let it), so
		// only x is cut; an unmoved box keeps the digitizer's trace as is.
		if tr.Panel >= 0 && tr.Panel < len(dp) && dp[tr.Panel].Box != dr.Panels[tr.Panel].Box {
			box := dp[tr.Panel].Box
			for k := range c.Y {
				x := float64(tr.X0+k) + 0.5
				if x < box[0] || x >= box[2] {
					c.Y[k] = math.NaN()
				}
			}
		}
		trs[i] = c
	}
	rate := b.Options.Digitize.RateHz
	rec := digitize.Signals(cal, dp, trs, rate)
	rec.Name = dr.Record.Name
	rec.Provenance = dr.Record.Provenance
	return rec, panels, nil
}

// Measure runs the measurement engine and puts its findings into the
// words and numbers the Findings tab shows.
func (b *Backend) Measure(rec *record.Record, quality map[string]float64) (*model.Summary, error) {
	opt := b.Options.Measure
	opt.LeadQuality = quality
	b.mu.Lock()
	st := b.last
	b.mu.Unlock()
	if st == nil || st.o == nil || st.o.Digitized == nil || st.o.Calib == nil {
		f, err := axis.Measure(rec, opt)
		if err != nil {
			return nil, err
		}
		return Summarize(f), nil
	}
	// The pipeline's own path, so the page's verdict comes with the
	// findings (and withholds them when the page is not to be read).
	dr := *st.o.Digitized
	dr.Record = rec
	o := &pipeline.Outcome{Page: st.o.Page, Calib: st.o.Calib, Digitized: &dr}
	o.Remeasure(opt)
	if o.MeasureErr != nil {
		return nil, o.MeasureErr
	}
	s := Summarize(o.Findings)
	s.Verdict, s.VerdictLevel = o.Verdict.Level.Label(), string(o.Verdict.Level)
	for _, r := range o.Verdict.Reasons {
		t := r.Text
		if r.Do != "" {
			t += " — " + r.Do
		}
		s.VerdictReasons = append(s.VerdictReasons, t)
	}
	return s, nil
}

// Summarize turns the engine's findings into the model's summary.
func Summarize(f *axis.Findings) *model.Summary {
	n := func(v axis.Num) float64 {
		if !v.OK() {
			return math.NaN()
		}
		return float64(v)
	}
	iv := f.IntervalsMS
	s := &model.Summary{
		Values: []model.Value{
			{Key: "heart_rate_bpm", Label: "Heart rate", Unit: "bpm", V: n(f.HeartRateBPM), SD: half(f.HeartRateCI90, f.HeartRateSD)},
			{Key: "pr", Label: "PR", Unit: "ms", V: n(iv.PR), SD: half(iv.PRCI90, iv.PRSD)},
			{Key: "qrs", Label: "QRS", Unit: "ms", V: n(iv.QRS), SD: half(iv.QRSCI90, iv.QRSSD)},
			{Key: "qt", Label: "QT", Unit: "ms", V: n(iv.QT), SD: half(iv.QTCI90, iv.QTSD)},
			{Key: "qtc_bazett", Label: "QTc Bazett", Unit: "ms", V: n(iv.QTcBazett), SD: half(iv.QTcBazettCI90, iv.QTcSD)},
			{Key: "qtc_fridericia", Label: "QTc Fridericia", Unit: "ms", V: n(iv.QTcFridericia), SD: math.NaN()},
			{Key: "qtc_framingham", Label: "QTc Framingham", Unit: "ms", V: n(iv.QTcFramingham), SD: math.NaN()},
			{Key: "qtc_hodges", Label: "QTc Hodges", Unit: "ms", V: n(iv.QTcHodges), SD: math.NaN()},
			{Key: "qrs_deg", Label: "QRS axis", Unit: "°", V: n(f.Axis.QRSDeg), SD: half(f.Axis.QRSDegCI90, f.Axis.QRSDegSD)},
			{Key: "p_deg", Label: "P axis", Unit: "°", V: n(f.Axis.PDeg), SD: half(f.Axis.PDegCI90, f.Axis.PDegSD)},
			{Key: "t_deg", Label: "T axis", Unit: "°", V: n(f.Axis.TDeg), SD: half(f.Axis.TDegCI90, f.Axis.TDegSD)},
		},
		QRSAxisDeg: n(f.Axis.QRSDeg), PAxisDeg: n(f.Axis.PDeg), TAxisDeg: n(f.Axis.TDeg),
		AxisClass:  axisClass(f.Axis),
		Transition: f.Transition,
		Rhythm:     f.Rhythm,
		Caution:    model.Caution,
		Detail:     f,
	}
	if f.TransitionCl != "" {
		s.Transition += " (" + f.TransitionCl + ")"
	}
	for _, m := range f.Axis.Methods {
		s.AxisMethods = append(s.AxisMethods, fmt.Sprintf("%s %s", m.Method, fmtDeg(n(m.QRSDeg))))
	}
	for _, fl := range f.Flags {
		s.Flags = append(s.Flags, fl.Message)
	}
	if f.Premature > 0 {
		s.Flags = append(s.Flags, fmt.Sprintf("%d premature beats", f.Premature))
	}
	return s
}

// axisClass is the axis category, or both sides when the interval
// crosses a limit.
func axisClass(a axis.Axes) string {
	if a.QRSCategoryRange != "" {
		return "borderline: " + a.QRSCategoryRange
	}
	return a.QRSCategory
}

// half returns the half-width of a 90 % interval, or sd when there is none.
func half(ci [2]axis.Num, sd axis.Num) float64 {
	if ci[0].OK() && ci[1].OK() {
		return float64(ci[1]-ci[0]) / 2
	}
	if sd.OK() {
		return float64(sd)
	}
	return math.NaN()
}

func fmtDeg(v float64) string { return record.FormatNum("%.0f°", v) }

// Export writes what the screen shows: the corrected record, the panels
// where the user put them and the findings measured after the
// corrections, through pipeline.Export with the PDF writer given.
func (b *Backend) Export(a *model.Analysis, job model.ExportJob) ([]string, error) {
	o, err := b.Outcome(a, job)
	if err != nil {
		return nil, err
	}
	eo := b.ExportOptions
	if eo.PDF == nil {
		eo.PDF = report.Write
	}
	return pipeline.Export(o, job.Dir, job.Stem, job.Formats, eo)
}

// Outcome is the pipeline outcome of what the screen shows: the reading
// with the corrected record, the moved panels and the findings of job.
func (b *Backend) Outcome(a *model.Analysis, job model.ExportJob) (*pipeline.Outcome, error) {
	st, ok := a.Handle.(*state)
	if !ok || st == nil {
		return nil, errors.New("engine: the reading is incomplete")
	}
	if job.Record == nil {
		return nil, errors.New("engine: nothing to export")
	}
	o := *st.o
	dr := *o.Digitized
	dr.Record = job.Record
	if len(job.Panels) == len(dr.Panels) {
		dr.Panels = append([]digitize.Panel(nil), dr.Panels...)
		for i, p := range job.Panels {
			dr.Panels[i].Box, dr.Panels[i].BaselineY = p.Box, p.BaselineY
		}
	}
	o.Digitized = &dr
	o.Findings, o.MeasureErr = nil, job.MeasureErr
	if job.Summary != nil {
		f, ok := job.Summary.Detail.(*axis.Findings)
		if !ok {
			return nil, errors.New("engine: the findings on screen are not the engine's")
		}
		o.Findings = f
	} else if o.MeasureErr == nil {
		o.MeasureErr = errors.New("not measured")
	}
	return &o, nil
}
