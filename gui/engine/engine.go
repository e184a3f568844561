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
	// ComparePDF draws the comparison page; nil is report.ComparePDF.
	ComparePDF ComparePDFWriter

	mu   sync.Mutex
	last *state // the page last analysed, for the page's verdict
}

// state is what the model carries opaquely for us.
type state struct {
	o *pipeline.Outcome // as read, before any correction

	once  sync.Once
	bt    *digitize.BoxTracer // prepared on the first box to trace
	btErr error
}

// tracer returns the page's box tracer, prepared once.
func (st *state) tracer(cal *calib.Result) boxTracer {
	st.once.Do(func() { st.bt, st.btErr = digitize.NewBoxTracer(cal) })
	if st.btErr != nil {
		return failedTracer{st.btErr}
	}
	return st.bt
}

type boxTracer interface {
	Trace(box [4]float64) (digitize.Trace, float64, error)
}

type failedTracer struct{ err error }

func (f failedTracer) Trace([4]float64) (digitize.Trace, float64, error) {
	return digitize.Trace{}, 0, f.err
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
		Quality:    map[string]float64{},
		Raw:        dr.Record,
		Warnings:   cal.Warnings,
		LayoutNote: dr.Misfit,
		PageCount:  max(pg.PageCount, 1),
		Handle:     &state{o: o},
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

// Resignal re-derives the signals with the panels where the user put
// them. A moved box cuts its trace to the box's new time span (columns
// outside become gaps). A resized box (its width changed; the model moves
// its time window with its edges) also reads the columns it was widened
// over, traced inside the new box. Panels beyond the reading's own are
// drawn by hand (model.Panel.Drawn): each is traced inside its box, timed
// on the page's clock from the reading's panel nearest to it in height,
// and gets its baseline from its trace. Everything is then turned into mV
// again by digitize.Signals.
func (b *Backend) Resignal(a *model.Analysis, panels []model.Panel) (*record.Record, []model.Panel, error) {
	st, ok := a.Handle.(*state)
	if !ok || st == nil {
		return nil, nil, errors.New("engine: the reading is incomplete")
	}
	dr, cal := st.o.Digitized, st.o.Calib
	if len(panels) < len(dr.Panels) {
		return nil, nil, fmt.Errorf("engine: %d panels given, the reading has %d", len(panels), len(dr.Panels))
	}
	out := append([]model.Panel(nil), panels...)
	dp := make([]digitize.Panel, len(panels))
	for i, p := range panels[:len(dr.Panels)] {
		dp[i] = dr.Panels[i]
		dp[i].Box, dp[i].BaselineY = p.Box, p.BaselineY
		dp[i].T0S, dp[i].T1S = p.T0S, p.T1S
	}
	trs := make([]digitize.Trace, 0, len(panels))
	for _, tr := range dr.Traces {
		c := tr
		c.Y = append([]float64(nil), tr.Y...)
		c.Conf = append([]float32(nil), tr.Conf...)
		i := tr.Panel
		if i < 0 || i >= len(dr.Panels) || dp[i].Box == dr.Panels[i].Box {
			trs = append(trs, c)
			continue
		}
		box, was := dp[i].Box, dr.Panels[i].Box
		if resized(box, was) {
			// Read the columns the box now covers beyond the trace.
			ext, _, err := st.tracer(cal).Trace(box)
			if err != nil && !errors.Is(err, digitize.ErrNoTraceInBox) {
				return nil, nil, err
			}
			if err == nil {
				c = widen(c, ext)
			}
		}
		// The trace may stray above or below its box (printers let it),
		// so only x is cut.
		for k := range c.Y {
			x := float64(c.X0+k) + 0.5
			if x < box[0] || x >= box[2] {
				c.Y[k] = math.NaN()
			}
		}
		trs = append(trs, c)
	}
	pxPerS := cal.PxPerMM * cal.SpeedMMPerS
	for i := len(dr.Panels); i < len(panels); i++ {
		p := panels[i]
		tr, base, err := st.tracer(cal).Trace(p.Box)
		if err != nil {
			return nil, nil, fmt.Errorf("engine: the panel drawn for %s: %w", p.Lead, err)
		}
		near := nearestRow(dr.Panels, base)
		org := near.Box[0] - near.T0S*pxPerS // time 0 of that row on the page
		t0 := (p.Box[0] - org) / pxPerS
		dp[i] = digitize.Panel{Lead: p.Lead, Row: near.Row, Col: nearestCol(dr.Panels, p.Box),
			Box: p.Box, BaselineY: base, T0S: t0, T1S: t0 + (p.Box[2]-p.Box[0])/pxPerS}
		dp[i].Rhythm = dp[i].T1S-dp[i].T0S > 0.5*pageSpanS(dr.Panels)
		tr.Lead, tr.Panel = p.Lead, i
		trs = append(trs, tr)
		out[i].Row, out[i].Col, out[i].Rhythm = dp[i].Row, dp[i].Col, dp[i].Rhythm
		out[i].BaselineY, out[i].T0S, out[i].T1S = base, dp[i].T0S, dp[i].T1S
		out[i].Drawn = true
	}
	rate := b.Options.Digitize.RateHz
	rec := digitize.Signals(cal, dp, trs, rate)
	rec.Name = dr.Record.Name
	rec.Provenance = dr.Record.Provenance
	return rec, out, nil
}

// resized reports whether a box's width changed (a move keeps it; the
// view moves both edges by the same amount).
func resized(box, was [4]float64) bool {
	return math.Abs((box[2]-box[0])-(was[2]-was[0])) > 1e-6
}

// widen returns tr with the columns of ext that lie outside tr's own
// columns added (the trace's own columns are kept as the reading traced
// them).
func widen(tr, ext digitize.Trace) digitize.Trace {
	lo := min(tr.X0, ext.X0)
	hi := max(tr.X0+len(tr.Y), ext.X0+len(ext.Y))
	out := tr
	out.X0 = lo
	out.Y = make([]float64, hi-lo)
	out.Conf = make([]float32, hi-lo)
	for k := range out.Y {
		x := lo + k
		switch {
		case x >= tr.X0 && x < tr.X0+len(tr.Y):
			out.Y[k], out.Conf[k] = tr.Y[x-tr.X0], tr.Conf[x-tr.X0]
		case x >= ext.X0 && x < ext.X0+len(ext.Y):
			out.Y[k], out.Conf[k] = ext.Y[x-ext.X0], ext.Conf[x-ext.X0]
		default:
			out.Y[k] = math.NaN()
		}
	}
	return out
}

// nearestRow is the reading's panel whose baseline is nearest to y (its
// row carries the page's clock there; rows may start at slightly
// different x on a page that was turned).
func nearestRow(ps []digitize.Panel, y float64) digitize.Panel {
	best, bestD := ps[0], math.Inf(1)
	for _, p := range ps {
		if d := math.Abs(p.BaselineY - y); d < bestD {
			best, bestD = p, d
		}
	}
	return best
}

// nearestCol is the grid column of the reading's panel whose centre is
// nearest to the box's across the page.
func nearestCol(ps []digitize.Panel, box [4]float64) int {
	col, bestD := 0, math.Inf(1)
	cx := (box[0] + box[2]) / 2
	for _, p := range ps {
		if p.Rhythm {
			continue
		}
		if d := math.Abs((p.Box[0]+p.Box[2])/2 - cx); d < bestD {
			col, bestD = p.Col, d
		}
	}
	return col
}

// pageSpanS is the longest time window of the reading's panels.
func pageSpanS(ps []digitize.Panel) float64 {
	s := 0.0
	for _, p := range ps {
		s = math.Max(s, p.T1S)
	}
	return s
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
			{Key: "heart_rate_bpm", Label: "Heart rate", Unit: "bpm", V: n(f.HeartRateBPM), SD: half(f.HeartRateBPM, f.HeartRateCI90, f.HeartRateSD)},
			{Key: "pr", Label: "PR", Unit: "ms", V: n(iv.PR), SD: half(iv.PR, iv.PRCI90, iv.PRSD)},
			{Key: "qrs", Label: "QRS", Unit: "ms", V: n(iv.QRS), SD: half(iv.QRS, iv.QRSCI90, iv.QRSSD)},
			{Key: "qt", Label: "QT", Unit: "ms", V: n(iv.QT), SD: half(iv.QT, iv.QTCI90, iv.QTSD)},
			{Key: "qtc_bazett", Label: "QTc Bazett", Unit: "ms", V: n(iv.QTcBazett), SD: half(iv.QTcBazett, iv.QTcBazettCI90, iv.QTcSD)},
			{Key: "qtc_fridericia", Label: "QTc Fridericia", Unit: "ms", V: n(iv.QTcFridericia), SD: math.NaN()},
			{Key: "qtc_framingham", Label: "QTc Framingham", Unit: "ms", V: n(iv.QTcFramingham), SD: math.NaN()},
			{Key: "qtc_hodges", Label: "QTc Hodges", Unit: "ms", V: n(iv.QTcHodges), SD: math.NaN()},
			{Key: "qrs_deg", Label: "QRS axis", Unit: "°", V: n(f.Axis.QRSDeg), SD: half(f.Axis.QRSDeg, f.Axis.QRSDegCI90, f.Axis.QRSDegSD)},
			{Key: "p_deg", Label: "P axis", Unit: "°", V: n(f.Axis.PDeg), SD: half(f.Axis.PDeg, f.Axis.PDegCI90, f.Axis.PDegSD)},
			{Key: "t_deg", Label: "T axis", Unit: "°", V: n(f.Axis.TDeg), SD: half(f.Axis.TDeg, f.Axis.TDegCI90, f.Axis.TDegSD)},
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

// half returns the half-width of a 90 % interval about v (its wider side
// when the interval is stretched to one side, as on a page whose time
// scale is in doubt), or sd when there is none.
func half(v axis.Num, ci [2]axis.Num, sd axis.Num) float64 {
	if ci[0].OK() && ci[1].OK() {
		if v.OK() {
			return math.Max(float64(v-ci[0]), float64(ci[1]-v))
		}
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
	if len(job.Panels) >= len(dr.Panels) {
		n := len(dr.Panels)
		dr.Panels = append([]digitize.Panel(nil), dr.Panels...)
		for i, p := range job.Panels {
			if i >= n { // drawn by hand
				dr.Panels = append(dr.Panels, digitize.Panel{Lead: p.Lead, Row: p.Row, Col: p.Col, Rhythm: p.Rhythm})
			}
			dr.Panels[i].Box, dr.Panels[i].BaselineY = p.Box, p.BaselineY
			dr.Panels[i].T0S, dr.Panels[i].T1S = p.T0S, p.T1S
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
