// Package engine connects the app's model to the real pipeline: reading a
// printout (calib, digitize), re-deriving signals after a box move,
// measuring (axis) and exporting (pipeline.Export). It has no fyne import.
package engine

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sync"

	"tracelift/axis"
	"tracelift/calib"
	"tracelift/digitize"
	"tracelift/gui/model"
	"tracelift/pipeline"
	"tracelift/record"
	"tracelift/samples"
)

// Layouts the user may choose on the Reading tab (the digitizer's names).
var Layouts = []string{"3x4", "3x4+1", "3x4+3", "6x2", "12x1", "1x1"}

// Backend is the pipeline behind the model.
type Backend struct {
	Options pipeline.Options // base options; the user's settings go on top

	mu   sync.Mutex
	last *state // the page last analysed, for the page's verdict
}

// state is what the model carries opaquely for us.
type state struct {
	page *calib.Page
	cal  *calib.Result
	dr   *digitize.Result
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
// options.
func (b *Backend) Analyze(ctx context.Context, src model.Source, s model.Settings, p model.Progress) (*model.Analysis, error) {
	opt := b.Options
	if s.PxPerMM > 0 {
		opt.Calib.UserPxPerMM, opt.Calib.ForceUser = s.PxPerMM, true
	}
	if s.GainMMPerMV > 0 {
		opt.Calib.StatedGainMMPerMV = s.GainMMPerMV
	}
	if s.SpeedMMPerS > 0 {
		opt.Calib.StatedSpeedMMPerS = s.SpeedMMPerS
	}
	if s.Layout != "" {
		opt.Digitize.Layout = s.Layout
	}
	opt.Load.Page = s.Page
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
	p("finding the grid and scale", 0.15)
	cal, err := calib.Detect(ctx, pg, opt.Calib)
	if err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	p("tracing the leads", 0.5)
	dr, err := digitize.Run(ctx, cal, opt.Digitize)
	if err != nil {
		return nil, err
	}
	p("measuring", 0.9)
	pipeline.FillProvenance(dr.Record, pg, cal, dr)
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
		Handle:    &state{page: pg, cal: cal, dr: dr},
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
	if len(panels) != len(st.dr.Panels) {
		return nil, nil, fmt.Errorf("engine: %d panels given, the reading has %d", len(panels), len(st.dr.Panels))
	}
	dp := make([]digitize.Panel, len(panels))
	for i, p := range panels {
		dp[i] = st.dr.Panels[i]
		dp[i].Box, dp[i].BaselineY = p.Box, p.BaselineY
	}
	trs := make([]digitize.Trace, len(st.dr.Traces))
	for i, tr := range st.dr.Traces {
		c := tr
		c.Y = append([]float64(nil), tr.Y...)
		// A moved box cuts its trace to the box's new time span. The
		// trace may stray above or below its box (printers let it), so
		// only x is cut; an unmoved box keeps the digitizer's trace as is.
		if tr.Panel >= 0 && tr.Panel < len(dp) && dp[tr.Panel].Box != st.dr.Panels[tr.Panel].Box {
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
	rec := digitize.Signals(st.cal, dp, trs, rate)
	rec.Name = st.dr.Record.Name
	rec.Provenance = st.dr.Record.Provenance
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
	if st == nil || st.dr == nil || st.cal == nil {
		f, err := axis.Measure(rec, opt)
		if err != nil {
			return nil, err
		}
		return Summarize(f), nil
	}
	// The pipeline's own path, so the page's verdict comes with the
	// findings (and withholds them when the page is not to be read).
	dr := *st.dr
	dr.Record = rec
	o := &pipeline.Outcome{Page: st.page, Calib: st.cal, Digitized: &dr}
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

func fmtDeg(v float64) string {
	if math.IsNaN(v) {
		return "—"
	}
	return fmt.Sprintf("%.0f°", v)
}

// Export writes the corrected record with its findings.
func (b *Backend) Export(a *model.Analysis, rec *record.Record, dir, stem string, formats []string) ([]string, error) {
	st, ok := a.Handle.(*state)
	if !ok || st == nil {
		return nil, errors.New("engine: the reading is incomplete")
	}
	dr := *st.dr
	dr.Record = rec
	o := &pipeline.Outcome{Page: st.page, Calib: st.cal, Digitized: &dr}
	o.Remeasure(b.Options.Measure)
	return pipeline.Export(o, dir, stem, formats, pipeline.ExportOptions{})
}
