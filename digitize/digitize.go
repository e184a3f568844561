package digitize

import (
	"context"
	"errors"
	"fmt"
	"image"
	"math"
	"sort"

	"tracelift/calib"
	"tracelift/record"
)

// Options steer the tracing. The zero value detects everything and
// samples at 500 Hz.
type Options struct {
	RateHz    float64  // output rate; 0 means 500
	Layout    string   // "" to detect, or one of record.Layouts
	LeadOrder string   // "" to detect, "standard" or "cabrera"
	Leads     []string // optional lead names for the panels in reading order (row by row, left to right, rhythm strips last)
}

// Panel is one drawn lead window on the rectified page.
type Panel struct {
	Lead      string     `json:"lead"`       // as printed: a standard name, or "-aVR" for Cabrera's inverted aVR
	Row       int        `json:"row"`        // grid position; rhythm strips continue the row count
	Col       int        `json:"col"`        // grid position
	Rhythm    bool       `json:"rhythm"`     // a strip across the whole page
	Box       [4]float64 `json:"box"`        // x0, y0, x1, y1 in rectified px; x0 is time T0S
	T0S       float64    `json:"t0_s"`       // time window on the tracing clock
	T1S       float64    `json:"t1_s"`       // time window on the tracing clock
	BaselineY float64    `json:"baseline_y"` // y of 0 mV in rectified px
}

// Trace is one panel's traced centre line.
type Trace struct {
	Lead  string    // as printed (see Panel.Lead)
	Panel int       // index into Result.Panels
	X0    int       // first column
	Y     []float64 // sub-pixel centre y per column from X0 (pixel centres at +0.5); NaN = gap
	Conf  []float32 // per column, 0..1
}

// LeadQuality says how far a lead can be trusted.
type LeadQuality struct {
	Confidence    float64  `json:"confidence"`
	Coverage      float64  `json:"coverage"`
	LawResidualUV float64  `json:"law_residual_uv,omitempty"`
	Notes         []string `json:"notes,omitempty"`
}

// LawCheck is the limb-lead law residual over one column of simultaneous
// panels. Residuals are RMS in µV after each lead's mean over the column
// is removed; −1 means the column lacks the leads for that relation.
// Goldberger's three are for aVR = −(I+II)/2, aVL = I − II/2 and
// aVF = II − I/2; where I or II is absent the augmented lead is instead
// predicted by least squares from the other limb leads present.
type LawCheck struct {
	Column          int        `json:"column"`
	T0S             float64    `json:"t0_s"`
	T1S             float64    `json:"t1_s"`
	EinthovenRMSuV  float64    `json:"einthoven_rms_uv"`
	GoldbergerRMSuV [3]float64 `json:"goldberger_rms_uv"` // aVR, aVL, aVF
	Worst           string     `json:"worst"`             // the lead that most breaks the laws here
}

// Place is a stretch worth checking by hand.
type Place struct {
	Lead string  `json:"lead"`
	T0S  float64 `json:"t0_s"`
	T1S  float64 `json:"t1_s"`
	Why  string  `json:"why"`
}

// Result is the digitized printout.
type Result struct {
	Record     *record.Record // the raw traces in mV
	Reconciled *record.Record // limb leads projected onto the laws by least squares (a separate output; Record is never altered)
	Layout     string
	Cabrera    bool
	Panels     []Panel
	Traces     []Trace
	Quality    map[string]LeadQuality
	Laws       []LawCheck
	Check      []Place
	// TimeZero says how time 0 was found on the page (T0First, T0Span
	// or T0Fall); T0Fall may put it off by the pulse's lead-out.
	TimeZero string
	// Misfit says in plain words why a layout given by hand does not
	// match what the page shows ("" when it does, or when the layout was
	// found): the page shows more rows than the layout reads, or the
	// limb leads fit another layout of as many rows far better. The
	// same words are in Warnings.
	Misfit string
	// Calib is the calibration the page was traced on: Run's input with
	// Adjustments carried out (by calib.Result.Apply), in order.
	Calib       *calib.Result
	Adjustments []calib.Adjustment
	// Warnings says what the tracing found doubtful on the page, beside
	// the calibration's own (Calib.Warnings): a layout given by hand that
	// misfits, a strip's label not read.
	Warnings []string
}

// Expected failures.
var (
	ErrInput   = errors.New("digitize: calibration result is missing its image, scale, gain or speed")
	ErrNoTrace = errors.New("digitize: no ECG trace rows found on the page")
	ErrLayout  = errors.New("digitize: the rows found do not match the layout; give the layout by hand")
)

// forcedLayoutError is ErrLayout for a layout the user chose: it names the
// rows the page shows and the rows the chosen layout needs, and does not ask
// for the layout by hand, since that is what was given.
type forcedLayoutError struct {
	layout      string
	found, want int
}

func (e forcedLayoutError) Error() string {
	return fmt.Sprintf("digitize: the page shows %d rows of traces, the chosen layout %s has %d", e.found, e.layout, e.want)
}

func (e forcedLayoutError) Unwrap() error { return ErrLayout }

// Run finds the layout, traces every panel and assembles the signals.
//
// Run never changes cal. What the traces show of the page's geometry and
// settings that the paper alone did not, it proposes as calib
// Adjustments, carried out by calib (Result.Apply) on Run's own copy of
// cal, which it traces on and returns as Result.Calib, with the
// adjustments in Result.Adjustments: when the calibration pulses lead
// the rows from the right, the page is upside down and is turned half a
// turn; when the rows show the page still turned by 0.1–1.5° (their
// time origins drift down the page), it is turned straight; when
// calib's scale is not from a confident grid and the traces span within
// 1 % of a standard 10 s page, the scale is taken from the span; the
// pulses at the row starts and the page's printed settings may give the
// gain and speed. Everything derived later from the tracing (Signals,
// overlays) is to use Result.Calib.
func Run(ctx context.Context, cal *calib.Result, opt Options) (*Result, error) {
	if cal == nil || (cal.Ink == nil && cal.Rectified == nil) {
		return nil, ErrInput
	}
	for _, v := range []float64{cal.PxPerMM, cal.GainMMPerMV, cal.SpeedMMPerS} {
		if !(v > 0) || math.IsInf(v, 0) {
			return nil, ErrInput
		}
	}
	if opt.RateHz < 0 || math.IsNaN(opt.RateHz) || math.IsInf(opt.RateHz, 0) || opt.RateHz > 20000 {
		return nil, fmt.Errorf("digitize: bad output rate %v Hz", opt.RateHz)
	}
	if opt.RateHz == 0 {
		opt.RateHz = 500
	}
	if opt.Layout != "" {
		if !record.Layout(opt.Layout).Known() {
			return nil, fmt.Errorf("digitize: unknown layout %q (want one of %s)", opt.Layout, record.LayoutNames(record.Layouts))
		}
	}
	switch opt.LeadOrder {
	case "", "standard", "cabrera":
	default:
		return nil, fmt.Errorf("digitize: unknown lead order %q (want standard or cabrera)", opt.LeadOrder)
	}
	// The tracer works on its own copy of the calibration; what the
	// traces show of the page's geometry and settings is applied to it
	// by calib (Result.Apply) and returned as Result.Adjustments.
	cal = cal.Clone()
	var adjusted []calib.Adjustment
	adjust := func(a calib.Adjustment) {
		if cal.Apply(a) {
			adjusted = append(adjusted, a)
		}
	}
	ink := cal.Ink
	if ink == nil {
		ink = calib.InkOf(cal.Rectified, cal.PxPerMM)
	}
	if ink.Bounds().Dx() < 16 || ink.Bounds().Dy() < 16 {
		return nil, ErrNoTrace
	}
	p := cal.PxPerMM
	g := prepare(ink, p)
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	rows := findRows(g, p, cal.GainMMPerMV)
	if len(rows) == 0 {
		return nil, ErrNoTrace
	}
	// A page left upside down shows its calibration pulses at the right.
	left, right := pulseSides(g, rows, rowPitch(rows, g, p), cal)
	if right >= 2 && right > left {
		adjust(calib.Adjustment{Kind: calib.AdjustHalfTurn})
		g = turnedGray(g)
		rows = findRows(g, p, cal.GainMMPerMV)
		if len(rows) == 0 {
			return nil, ErrNoTrace
		}
	}
	// A page of printed text has rows too, and its even lines and letters
	// can pass for a faint grid: unless the user gave the scale or a
	// calibration pulse was read, the rows must look like traces, and
	// without a grid they must be no more than a layout draws.
	if cal.Source != "user" && cal.Source != "pulse" && (textOnly(g, rows, p) ||
		(cal.Source != "grid" && len(rows) > maxLayoutRows)) {
		return nil, fmt.Errorf("digitize: no ECG found: the lines across the page are broken like printed text, not drawn as traces; check that the file shows an ECG printout: %w", calib.ErrNotECG)
	}
	if opt.Layout == "" {
		rows = trimRows(rows)
		rows = dropTextRows(g, rows, rowPitch(rows, g, p))
	}
	pitch := rowPitch(rows, g, p)
	gn := pulseGain(g, rows, pitch, cal)
	if gn > 0 && gn != cal.GainMMPerMV {
		adjust(calib.Adjustment{Kind: calib.AdjustRowPulseGain, GainMMPerMV: gn})
	} else if gn == 0 && cal.Source != "user" && !isStandardGain(cal.GainMMPerMV) {
		// calib read something as a pulse that no standard setting
		// explains, and the row starts show none: the common 10 mm/mV.
		adjust(calib.Adjustment{Kind: calib.AdjustGainAssumed})
	}
	speed, gain := printedSettings(g, rows, pitch, cal.PxPerMM)
	adjust(calib.Adjustment{Kind: calib.AdjustPrinted, SpeedMMPerS: speed, GainMMPerMV: gain, PulseAssumed: gn == 0 && cal.SettingsAssumed()})
	misfit := ""
	if opt.Layout != "" {
		// The rows an automatic reading would take; more than the layout
		// reads are rows left out (and, unless they are rhythm strips
		// the layout leaves aside, leads named after the wrong rows).
		if shown, n := len(dropTextRows(g, trimRows(rows), pitch)), layoutRows(opt.Layout); shown > n {
			left := fmt.Sprintf("the other %d are", shown-n)
			if shown-n == 1 {
				left = "the other row is"
			}
			misfit = fmt.Sprintf("the page shows %d rows of traces and the chosen layout %s reads %d: %s left out, and if the page is not printed in %s its leads are named wrongly; choose the layout the page shows, or let it be found", shown, opt.Layout, n, left, opt.Layout)
		}
	}
	if opt.Layout != "" && layoutRows(opt.Layout) != len(rows) {
		rows = fitRows(rows, layoutRows(opt.Layout))
		if rows == nil {
			return nil, forcedLayoutError{layout: opt.Layout, found: len(findRows(g, p, cal.GainMMPerMV)), want: layoutRows(opt.Layout)}
		}
	}
	hyps := candidates(len(rows), opt)
	if len(hyps) == 0 {
		if opt.Layout != "" {
			return nil, forcedLayoutError{layout: opt.Layout, found: len(rows), want: layoutRows(opt.Layout)}
		}
		return nil, fmt.Errorf("%w (found %d rows)", ErrLayout, len(rows))
	}
	pg := newPage(g, rows, cal)
	if deg := math.Abs(math.Atan(pg.shear)) * 180 / math.Pi; pg.shearFitted && deg >= minDeskewDeg && deg <= maxDeskewDeg && zeroOrigin(cal) {
		// Turn the page straight and find the rows again; keep the turn
		// only when the same rows come back.
		saved, savedN := cal, len(adjusted)
		cal = cal.Clone()
		adjust(calib.Adjustment{Kind: calib.AdjustStraighten, Shear: pg.shear, Center: [2]float64{pg.x0f + pg.span/2, meanBase(rows)}})
		ink2 := cal.Ink
		if ink2 == nil {
			ink2 = calib.InkOf(cal.Rectified, cal.PxPerMM)
		}
		g2 := prepare(ink2, p)
		rows2 := findRows(g2, p, cal.GainMMPerMV)
		if opt.Layout == "" {
			rows2 = trimRows(rows2)
		} else if layoutRows(opt.Layout) != len(rows2) {
			rows2 = fitRows(rows2, layoutRows(opt.Layout))
		}
		// A turn of at most 1.5° leaves the traces' span as it was (to
		// 0.04 %); a span that moved found its ends on something else
		// (a grid line the turn left slanted, which line removal then
		// misses at the grid's edge).
		pg2 := newPage(g2, rows2, cal)
		if len(rows2) == len(rows) && math.Abs(pg2.span-pg.span) <= math.Max(3, 0.005*pg.span) {
			g, rows, pg = g2, rows2, pg2
		} else {
			cal, adjusted = saved, adjusted[:savedN]
		}
	}
	if k, spanS, want := spanScale(pg.span, cal); k != 1 {
		adjust(calib.Adjustment{Kind: calib.AdjustSpanScale, Factor: k, SpanS: spanS, WantS: want})
		pg.pxPerMM, pg.pxPerS = cal.PxPerMM, cal.PxPerMM*cal.SpeedMMPerS
	}
	// A layout given by hand is read as given; the other layouts of as
	// many rows are scored beside it (their columns divide the finest's:
	// 6x2 and 3x4+3 share six rows) to say when the page fits one of
	// them far better.
	var others []hypothesis
	if opt.Layout != "" {
		for _, h := range candidates(len(rows), Options{LeadOrder: opt.LeadOrder}) {
			if h.layout != opt.Layout {
				others = append(others, h)
			}
		}
	}
	// Trace every row in as many equal segments as the finest layout
	// among the candidates has columns.
	nseg := 1
	for _, h := range append(append([]hypothesis(nil), hyps...), others...) {
		nseg = max(nseg, layoutCols(h.layout))
	}
	segs, err := pg.traceRows(ctx, nseg)
	if err != nil {
		return nil, err
	}
	best, bestScore := -1, math.Inf(1)
	var bestPanels []Panel
	var bestTraces []Trace
	for i, h := range hyps {
		panels, traces := pg.assemble(h, segs, nseg, opt.Leads, false)
		s := lawScore(Signals(cal, panels, traces, 250), windowsOf(panels))
		if s < bestScore-1e-9 || best < 0 {
			best, bestScore, bestPanels, bestTraces = i, s, panels, traces
		}
	}
	h := hyps[best]
	if misfit == "" {
		altScore, alt := math.Inf(1), ""
		for _, o := range others {
			if nseg%layoutCols(o.layout) != 0 {
				continue
			}
			panels, traces := pg.assemble(o, segs, nseg, opt.Leads, false)
			if sc := lawScore(Signals(cal, panels, traces, 250), windowsOf(panels)); sc < altScore {
				altScore, alt = sc, o.layout
			}
		}
		// A quarter of the residual energy, and a forced reading whose
		// limb leads miss the laws by 3 % of their energy: far beyond
		// what the tracing's own errors give. Measured on rendered 6x2
		// pages (dipole seeds 1–4): read as 6x2 0.0001–0.0002, read as
		// 3x4+3 0.105–0.125.
		if alt != "" && bestScore > misfitScore && altScore < bestScore/4 {
			misfit = fmt.Sprintf("the limb leads fit Einthoven's and Goldberger's laws far better read as %s than as the chosen %s: the page is probably printed in %s, and read as %s its leads are named wrongly", alt, opt.Layout, alt, opt.Layout)
		}
	}
	var warns []string
	if misfit != "" {
		warns = append(warns, "digitize: "+misfit)
	}
	// The layout is chosen on the segments' own traces; the chosen one
	// is then assembled again with the traces across segment boundaries
	// filling the margins.
	if c := layoutCols(h.layout); c != nseg {
		segs, err = pg.traceRows(ctx, c)
		if err != nil {
			return nil, err
		}
		nseg = c
	}
	bestPanels, bestTraces = pg.assemble(h, segs, nseg, opt.Leads, true)
	if h.layout == "1x1" && len(opt.Leads) == 0 && len(bestPanels) == 1 && len(bestTraces) == 1 {
		// A lone strip is named by its label when it can be read; else
		// it stays the layout's usual II.
		switch name := stripLabel(g, rows[0].base, rows[0].x0, p); {
		case name == "":
			warns = append(warns, fmt.Sprintf("digitize: the strip's label could not be read; it is taken as %s (check it, or name it by hand)", bestPanels[0].Lead))
		case name != bestPanels[0].Lead:
			warns = append(warns, fmt.Sprintf("digitize: the strip's label reads %s; check it", name))
			bestPanels[0].Lead, bestTraces[0].Lead = name, name
		}
	}
	res := &Result{Layout: h.layout, Cabrera: h.cabrera, Panels: bestPanels, Traces: bestTraces, TimeZero: pg.t0From, Misfit: misfit,
		Calib: cal, Adjustments: adjusted, Warnings: warns}
	res.Record = Signals(cal, res.Panels, res.Traces, opt.RateHz)
	res.Record.Provenance.Layout = h.layout
	wins := windowsOf(res.Panels)
	conf := leadConfidence(res.Panels, res.Traces)
	var perLead map[string]float64
	res.Laws, perLead = lawChecks(res.Record, wins, conf)
	res.Reconciled = reconcile(res.Record, wins)
	res.Quality, res.Check = assess(cal, res, conf, perLead)
	return res, nil
}

// misfitScore is the law score (residual energy over signal energy) above
// which a layout given by hand is compared with the others of as many
// rows: see Run.
const misfitScore = 0.03

// fitRows keeps the n strongest-spaced rows when more were found (extra
// text lines), or fails.
func fitRows(rows []rowInfo, n int) []rowInfo {
	if len(rows) < n {
		return nil
	}
	// Rows that span (nearly) the whole trace width are lead rows; a
	// rhythm strip sits below them (common practice), so of those the top
	// n are kept. Only when too few rows are that wide, the n longest.
	long := 0.0
	for _, r := range rows {
		long = math.Max(long, float64(r.x1-r.x0))
	}
	var full []rowInfo
	for _, r := range rows {
		if float64(r.x1-r.x0) >= 0.9*long {
			full = append(full, r)
		}
	}
	if len(full) >= n {
		return append([]rowInfo(nil), full[:n]...)
	}
	// Keep the n rows whose spans are longest.
	idx := make([]int, len(rows))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool {
		return rows[idx[a]].x1-rows[idx[a]].x0 > rows[idx[b]].x1-rows[idx[b]].x0
	})
	idx = idx[:n]
	sort.Ints(idx)
	out := make([]rowInfo, n)
	for i, j := range idx {
		out[i] = rows[j]
	}
	return out
}

// rowPitch is the median spacing of the rows, px.
func rowPitch(rows []rowInfo, g *gray, pxPerMM float64) float64 {
	if len(rows) < 2 {
		return math.Min(float64(g.h)/2, 60*pxPerMM)
	}
	var gaps []float64
	for i := 1; i < len(rows); i++ {
		gaps = append(gaps, rows[i].base-rows[i-1].base)
	}
	sort.Float64s(gaps)
	return gaps[len(gaps)/2]
}

// zeroOrigin reports whether cal's images start at (0, 0).
func zeroOrigin(cal *calib.Result) bool {
	return (cal.Ink == nil || cal.Ink.Rect.Min == (image.Point{})) &&
		(cal.Rectified == nil || cal.Rectified.Rect.Min == (image.Point{}))
}

// meanBase is the mean baseline of the rows, px.
func meanBase(rows []rowInfo) float64 {
	s := 0.0
	for _, r := range rows {
		s += r.base
	}
	return s / float64(max(1, len(rows)))
}
