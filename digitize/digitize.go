package digitize

import (
	"context"
	"errors"
	"fmt"
	"image"
	"math"
	"sort"
	"strings"

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
	// same words are in cal.Warnings.
	Misfit string
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
// Run may correct cal in place, and then says so in cal.Warnings: when
// the calibration pulses lead the rows from the right, the page is upside
// down and Run turns cal's images half a turn (updating Turned,
// RectToImage and Pulses); when calib's scale is not from a confident grid
// and the traces span within 1 % of a standard 10 s page, the
// scale is taken from the span (PxPerMM, PxPerMMX, PxPerMMY); when the
// rows show the page still turned by 0.1–1.5° (their time origins drift
// down the page), the images are turned straight (Rectified, Ink,
// RectToImage, Pulses, RotationDeg). Everything
// derived later from cal (Signals, overlays) then agrees with the traces.
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
	ink := cal.Ink
	if ink == nil {
		ink = InkFromRGB(cal.Rectified)
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
		turnResultHalf(cal)
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
		cal.Warnings = append(cal.Warnings, fmt.Sprintf("digitize: the calibration pulses at the row starts show %g mm/mV (not %g); that gain is used", gn, cal.GainMMPerMV))
		cal.GainMMPerMV = gn
	} else if gn == 0 && cal.Source != "user" && !isStandardGain(cal.GainMMPerMV) {
		// calib read something as a pulse that no standard setting
		// explains, and the row starts show none: the common 10 mm/mV.
		cal.Warnings = append(cal.Warnings, fmt.Sprintf("digitize: %.3g mm/mV is not a standard gain and no calibration pulse leads the rows; 10 mm/mV is assumed", cal.GainMMPerMV))
		cal.GainMMPerMV = 10
	}
	readSettings(g, rows, pitch, cal, gn == 0 && cal.SettingsAssumed())
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
		saved := *cal
		saved.Pulses = append([]calib.Pulse(nil), cal.Pulses...)
		saved.Warnings = append([]string(nil), cal.Warnings...)
		deskew(cal, pg.shear, pg.x0f+pg.span/2, meanBase(rows))
		ink2 := cal.Ink
		if ink2 == nil {
			ink2 = InkFromRGB(cal.Rectified)
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
			*cal = saved
		}
	}
	if k, spanS, want := spanScale(pg.span, cal); k != 1 {
		rescale(cal, k, spanS, want)
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
	if misfit != "" {
		cal.Warnings = append(cal.Warnings, "digitize: "+misfit)
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
			cal.Warnings = append(cal.Warnings, fmt.Sprintf("digitize: the strip's label could not be read; it is taken as %s (check it, or name it by hand)", bestPanels[0].Lead))
		case name != bestPanels[0].Lead:
			cal.Warnings = append(cal.Warnings, fmt.Sprintf("digitize: the strip's label reads %s; check it", name))
			bestPanels[0].Lead, bestTraces[0].Lead = name, name
		}
	}
	res := &Result{Layout: h.layout, Cabrera: h.cabrera, Panels: bestPanels, Traces: bestTraces, TimeZero: pg.t0From, Misfit: misfit}
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

// page holds what every hypothesis shares.
type page struct {
	g           *gray
	rows        []rowInfo
	pitch       float64
	x0, x1      int       // the common trace span of the rows
	x0f         float64   // the first sample's position, continuous px
	rowX0       []float64 // per row, the first sample's position, continuous px (one clock: see timeBase)
	span        float64   // px from the first sample to the last, the same in every row
	shear       float64   // d(row origin x)/dy from the time base fit
	shearFitted bool      // shear was fitted (three or more rows' ends agree)
	pxPerS      float64
	halfLn      float64
	pxPerMM     float64
	t0From      string // how time 0 was found (T0First, T0Span, T0Fall)
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

func newPage(g *gray, rows []rowInfo, cal *calib.Result) *page {
	pg := &page{g: g, rows: rows, pxPerMM: cal.PxPerMM, pxPerS: cal.PxPerMM * cal.SpeedMMPerS}
	pg.pitch = rowPitch(rows, g, cal.PxPerMM)
	pg.halfLn = strokeHalfWidth(g, rows, cal.PxPerMM)
	var starts, ends, falls, rises []int
	var mg *gray
	for i := range rows {
		r := &rows[i]
		var fall int
		r.x0, fall = pulseEndFall(g, r.x0, r.x1, r.base, pg.pitch, cal.PxPerMM, cal.SpeedMMPerS, cal.GainMMPerMV)
		if fall < 0 {
			// calib may have seen this row's pulse where the row's own
			// search did not (a photocopy's noise along its lead-in).
			if x, ok := calibPulseEnd(cal.Pulses, r.base, pg.pitch, r.x1); ok {
				fall = x
				r.x0 = max(r.x0, x+1)
			}
		}
		// A pulse may stand at the row's right end instead: the same
		// search on the page mirrored left to right finds it.
		rise := -1
		if fall < 0 {
			if mg == nil {
				mg = mirrored(g)
			}
			if mx0, mfall := pulseEndFall(mg, g.w-1-r.x1, g.w-1-r.x0, r.base, pg.pitch, cal.PxPerMM, cal.SpeedMMPerS, cal.GainMMPerMV); mfall >= 0 {
				rise = g.w - 1 - mfall
				r.x1 = min(r.x1, g.w-1-mx0)
			}
		}
		starts = append(starts, r.x0)
		ends = append(ends, r.x1)
		falls = append(falls, fall)
		rises = append(rises, rise)
	}
	sort.Ints(starts)
	sort.Ints(ends)
	// The trace's first sample sits half a line width inside its ink.
	pg.x0f = startEdge(g, rows, starts[len(starts)/2]) + pg.halfLn
	pg.x0 = int(math.Round(pg.x0f))
	pg.x1 = ends[len(ends)/2] + 1 - int(math.Round(pg.halfLn))
	if pg.x1 <= pg.x0+8 {
		pg.x1 = min(g.w, pg.x0+8)
	}
	pg.span = float64(pg.x1) - pg.x0f
	pg.rowX0 = make([]float64, len(rows))
	for i := range pg.rowX0 {
		pg.rowX0[i] = pg.x0f
	}
	// One clock for the page, from every row's trace ends.
	marks := make([]rowMarks, len(rows))
	// The round cap at a trace's end is one disc of the pen: its radius
	// is the thinnest stretch's half width (noise and slope only thicken
	// a line down a column), not the typical one.
	capHW := strokeHalfWidthQ(g, rows, 0.05, cal.PxPerMM)
	// The coarse extents err outward at the ends (specks within 3 mm
	// of the trace join it) and inward at the starts (a pulse's lead-out
	// is skipped with the gap): the shortest of them is the safe guard.
	startRef := starts[len(starts)-1]
	endRef := ends[0]
	// A grid line left in the working map carries a row's coarse extent
	// to the grid's edge; where the rows' strong ink ends is the safer
	// guard then.
	for _, r := range rows {
		endRef = min(endRef, strongEnd(g, r, pg.pitch))
	}
	// Pulses found in two rows or more guard the starts, and so does one
	// row's when calib saw pulses on the page; otherwise one row's alone
	// may be a wave taken for a pulse, and guards only its own row.
	minFall, nFall := math.MaxInt, 0
	for _, f := range falls {
		if f >= 0 {
			minFall = min(minFall, f)
			nFall++
		}
	}
	if nFall < 2 && len(cal.Pulses) == 0 {
		minFall = math.MaxInt
	}
	for i, r := range rows {
		marks[i] = measureRow(g, r, pg.pitch, cal.PxPerMM, falls[i], rises[i], capHW, startRef, endRef)
		// The pulses stand before time 0 in every row: a start found left
		// of another row's pulse is a walk along something else (a pulse
		// not recognised in this row, a label, the margin).
		if minFall != math.MaxInt && marks[i].start <= float64(minFall) {
			marks[i].okStart = false
		}
	}
	labelPieces(marks, cal.PxPerMM)
	pg.t0From = hiddenStarts(marks, pg.halfLn, cal.PxPerMM, cal.PxPerMM*cal.SpeedMMPerS)
	tol := math.Max(1.5, 0.3*cal.PxPerMM)
	if x0s, L, b, fitted, ok := timeBase(rows, marks, tol); ok && L > 8 {
		pg.rowX0, pg.span = x0s, L
		pg.shear, pg.shearFitted = b, fitted
		pg.x0f = median(x0s)
		pg.x0 = int(math.Round(pg.x0f))
		pg.x1 = int(math.Round(pg.x0f + L))
	} else {
		// No clock from both ends (the traces run to the picture's edge,
		// say): the starts the walks found still beat the coarse extents,
		// which a wave leaving the row's band cuts short.
		var ss []float64
		for _, m := range marks {
			if m.okStart {
				ss = append(ss, m.start)
			}
		}
		if len(ss) > 0 {
			x1 := pg.x0f + pg.span
			pg.x0f = median(ss)
			pg.x0 = int(math.Round(pg.x0f))
			pg.span = x1 - pg.x0f
			for i := range pg.rowX0 {
				pg.rowX0[i] = pg.x0f
			}
		}
	}
	return pg
}

// mirrored returns g mirrored left to right.
func mirrored(g *gray) *gray {
	m := &gray{w: g.w, h: g.h, pix: make([]uint8, len(g.pix))}
	if g.raw != nil {
		m.raw = make([]uint8, len(g.raw))
	}
	for y := 0; y < g.h; y++ {
		row := y * g.w
		for x := 0; x < g.w; x++ {
			m.pix[row+g.w-1-x] = g.pix[row+x]
			if g.raw != nil {
				m.raw[row+g.w-1-x] = g.raw[row+x]
			}
		}
	}
	return m
}

// calibPulseEnd returns the last column of a pulse calib found standing
// on the baseline base (its foot within a fifth of the pitch) left of
// the middle of a row that ends at x1, false when there is none.
func calibPulseEnd(ps []calib.Pulse, base, pitch float64, x1 int) (int, bool) {
	for _, p := range ps {
		b := p.Box
		if math.Abs(b[3]-base) <= 0.2*pitch && b[1] < base && b[2] < float64(x1)/2 {
			return int(math.Floor(b[2])), true
		}
	}
	return 0, false
}

// strokeHalfWidth estimates half the trace's line width, to a fraction
// of a pixel: across a flat stretch of line the ink coverage summed down
// a column is the line's width (the blur keeps sums).
func strokeHalfWidth(g *gray, rows []rowInfo, pxPerMM float64) float64 {
	return strokeHalfWidthQ(g, rows, 0.5, pxPerMM)
}

// strokeHalfWidthQ is strokeHalfWidth at quantile q of the columns
// sampled: a slope only thickens a line down a column, so a low quantile
// is the width across the line itself.
func strokeHalfWidthQ(g *gray, rows []rowInfo, q, pxPerMM float64) float64 {
	pix := g.raw
	if pix == nil {
		pix = g.pix
	}
	// A flat stretch of line runs down a column for the pen's width and
	// the blur's: up to 1.2 mm for the thickest pens (1 mm).
	flat := max(16, int(1.2*pxPerMM))
	reach := max(40, int(3*pxPerMM))
	var ws []float64
	for _, r := range rows {
		y := int(r.base)
		for x := r.x0; x < r.x1; x += 7 {
			if y < 0 || y >= g.h || g.pix[y*g.w+x] < 96 {
				continue
			}
			a, b := y, y
			for a > 0 && g.pix[(a-1)*g.w+x] >= 32 && y-a < reach {
				a--
			}
			for b < g.h-1 && g.pix[(b+1)*g.w+x] >= 32 && b-y < reach {
				b++
			}
			if b-a > flat { // not a flat stretch
				continue
			}
			core, sum := 0.0, 0.0
			for i := a - 2; i <= b+2; i++ {
				if i >= 0 && i < g.h {
					v := float64(pix[i*g.w+x])
					core = math.Max(core, v)
				}
			}
			// The paper level under the line (what the blur left of a grid
			// line, say) is the level at the ends of the window.
			floor := 0.0
			if a-3 >= 0 && b+3 < g.h {
				floor = math.Min(float64(pix[(a-3)*g.w+x]), float64(pix[(b+3)*g.w+x]))
			}
			if core-floor < 32 {
				continue
			}
			for i := a - 2; i <= b+2; i++ {
				if i >= 0 && i < g.h {
					sum += math.Max(0, float64(pix[i*g.w+x])-floor)
				}
			}
			// A line thinner than the blur does not reach full strength;
			// then the core understates it and the width is at least the
			// blur's. A sloping line crosses a column over its width
			// times √(1+s²); the slope s comes from the line's centre two
			// columns either side.
			s := 0.0
			if x-2 >= 0 && x+2 < g.w {
				cl, okl := inkCentre(pix, g.w, x-2, a-4, b+4, g.h, floor)
				cr, okr := inkCentre(pix, g.w, x+2, a-4, b+4, g.h, floor)
				if !okl || !okr {
					continue
				}
				s = (cr - cl) / 4
			}
			ws = append(ws, sum/(core-floor)/math.Sqrt(1+s*s))
		}
	}
	if len(ws) == 0 {
		return 1
	}
	sort.Float64s(ws)
	return math.Max(0.5, ws[int(q*float64(len(ws)-1))]/2)
}

// strongEnd returns the last column of row r, within its coarse extent,
// where the ink near the row reaches 0.6 of the row's usual strength (the
// median over columns of the column maximum): grid lines left by line
// removal stay well under it.
func strongEnd(g *gray, r rowInfo, pitch float64) int {
	ya, yb := max(0, int(r.base-0.5*pitch)), min(g.h, int(r.base+0.5*pitch))
	core := medianColMax(g, r.x0, r.x1, ya, yb)
	if core < 0 {
		return r.x1
	}
	strong := core * 6 / 10
	x := min(r.x1, g.w-1)
	for x > r.x0 && colMax(g, x, ya, yb) < strong {
		x--
	}
	return x
}

// inkCentre returns the ink-weighted centre row of column x over rows
// [ya, yb], ink above floor only.
func inkCentre(pix []uint8, w, x, ya, yb, h int, floor float64) (float64, bool) {
	var sw, swy float64
	for y := max(0, ya); y <= min(h-1, yb); y++ {
		v := math.Max(0, float64(pix[y*w+x])-floor)
		sw += v
		swy += v * float64(y)
	}
	if sw == 0 {
		return 0, false
	}
	return swy / sw, true
}

// startEdge returns the left edge of the ink where the traces begin, to
// a fraction of a pixel: along the row through the first inked column,
// the coverage summed up to a point well inside the line is the length
// of line up to that point.
func startEdge(g *gray, rows []rowInfo, s int) float64 {
	pix := g.raw
	if pix == nil {
		pix = g.pix
	}
	var es []float64
	for _, r := range rows {
		if s-4 < 0 || s+5 >= g.w {
			continue
		}
		best, yb := -1, -1
		for y := max(0, int(r.base)-60); y < min(g.h, int(r.base)+60); y++ {
			if v := int(pix[y*g.w+s+3]); v > best {
				best, yb = v, y
			}
		}
		if yb < 0 {
			continue
		}
		row := pix[yb*g.w:]
		core := math.Max(float64(row[s+3]), math.Max(float64(row[s+4]), float64(row[s+5])))
		if core < 32 {
			continue
		}
		sum := 0.0
		for x := s - 4; x < s+4; x++ {
			sum += math.Min(1, float64(row[x])/core)
		}
		es = append(es, float64(s+4)-sum)
	}
	if len(es) == 0 {
		return float64(s)
	}
	sort.Float64s(es)
	return es[len(es)/2]
}

// segTrace is one row segment's trace.
type segTrace struct {
	x0   int
	y    []float64
	conf []float32
	// join is the trace across the boundary at the segment's left end
	// (nil for the first): a rhythm strip runs on unbroken where the
	// rows above change lead, and its trace fills the margins kept
	// clear of separator ticks there.
	join *segTrace
}

// segBounds returns the column edges of n equal segments of row r's
// span, in continuous px: every row runs on the page's one clock, from
// its own origin.
func (pg *page) segBounds(n, r int) []float64 {
	out := make([]float64, n+1)
	colPx := pg.span / float64(n)
	// Snap to 2.5 s per column of a 10 s page when the measured span is
	// that to within 0.2 % (common practice; pages of 9.7–9.9 s are
	// common too, so a looser snap would misplace every column).
	if n > 1 {
		if d := 10.0 / float64(n) * pg.pxPerS; math.Abs(colPx-d) < 0.002*d {
			colPx = d
		}
	}
	x0 := pg.x0f
	if r >= 0 && r < len(pg.rowX0) {
		x0 = pg.rowX0[r]
	}
	for i := range out {
		out[i] = x0 + float64(i)*colPx
	}
	out[n] = math.Max(out[n], x0+pg.span)
	return out
}

// rowBand is the band the path of row is followed in over columns
// [x0, x1): the row's baseline ± 0.95 of the row pitch.
func (pg *page) rowBand(row rowInfo, x0, x1 int) band {
	return band{x0: x0, x1: x1, home: row.base, pitch: pg.pitch, halfLine: math.Max(pg.halfLn, 1),
		y0: max(0, int(row.base-0.95*pg.pitch)), y1: min(pg.g.h, int(row.base+0.95*pg.pitch))}
}

func (pg *page) traceRows(ctx context.Context, n int) ([][]segTrace, error) {
	margin := int(math.Ceil(pg.halfLn + 0.3*pg.pxPerMM)) // clear of separator ticks at a boundary
	out := make([][]segTrace, len(pg.rows))
	edges := make([][]*pathEdges, len(pg.rows))
	for r, row := range pg.rows {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		out[r] = make([]segTrace, n)
		edges[r] = make([]*pathEdges, n)
		xs := pg.segBounds(n, r)
		for s := 0; s < n; s++ {
			a, b := int(math.Round(xs[s])), int(math.Round(xs[s+1]))
			if s == n-1 {
				b = min(pg.g.w, int(math.Ceil(xs[s+1]))+1) // the column holding the last sample
			}
			ta, tb := a, b
			if s > 0 {
				ta += margin
			}
			if s < n-1 {
				tb -= margin
			}
			edges[r][s] = followPath(pg.g, pg.rowBand(row, ta, min(tb, pg.g.w)))
			st := segTrace{x0: a, y: make([]float64, b-a), conf: make([]float32, b-a)}
			for i := range st.y {
				st.y[i] = math.NaN()
			}
			out[r][s] = st
		}
	}
	// One pen drew the page: its radius is fitted to every trace's
	// strokes at once.
	var all []*pathEdges
	for _, es := range edges {
		for _, e := range es {
			if e != nil {
				all = append(all, e)
			}
		}
	}
	R := fitPenRadius(all, math.Max(pg.halfLn, 1))
	// The stretches across each boundary, with 1 mm of trace either side
	// of the margins to follow the line in and out.
	ctxPx := int(math.Ceil(pg.pxPerMM))
	for r, row := range pg.rows {
		xs := pg.segBounds(n, r)
		for s := 1; s < n; s++ {
			a := int(math.Round(xs[s]))
			bd := pg.rowBand(row, max(0, a-margin-ctxPx), min(pg.g.w, a+margin+ctxPx+1))
			e := followPath(pg.g, bd)
			if e == nil {
				continue
			}
			ys, cf := e.finish(R)
			j := &segTrace{x0: bd.x0, y: make([]float64, len(ys)), conf: cf}
			for i := range ys {
				j.y[i] = ys[i] + 0.5
			}
			out[r][s].join = j
		}
	}
	for r := range edges {
		for s, e := range edges[r] {
			if e == nil {
				continue
			}
			ys, cf := e.finish(R)
			st := out[r][s]
			for i := range ys {
				j := e.b.x0 - st.x0 + i // the band starts margin px into the segment
				if j >= 0 && j < len(st.y) {
					st.y[j] = ys[i] + 0.5 // pixel index to continuous coordinates
					st.conf[j] = cf[i]
				}
			}
		}
	}
	return out, nil
}

// fillJoin fills the blanks of trace tr from the trace j across a
// segment boundary.
func fillJoin(tr *Trace, j *segTrace) {
	if j == nil {
		return
	}
	for k, v := range j.y {
		i := j.x0 + k - tr.X0
		if i >= 0 && i < len(tr.Y) && math.IsNaN(tr.Y[i]) && !math.IsNaN(v) {
			tr.Y[i], tr.Conf[i] = v, j.conf[k]
		}
	}
}

// fillEdge fills the blanks at one end of trace tr (dir −1 its start,
// +1 its end) from the trace j across the boundary there, when j meets
// tr within tol px at tr's last traced column before the blanks.
func fillEdge(tr *Trace, j *segTrace, dir int, tol float64) {
	if j == nil || len(tr.Y) == 0 {
		return
	}
	// The last traced column, walking from the end inwards.
	i := 0
	if dir > 0 {
		i = len(tr.Y) - 1
	}
	for i >= 0 && i < len(tr.Y) && math.IsNaN(tr.Y[i]) {
		i -= dir
	}
	if i < 0 || i >= len(tr.Y) || i == 0 && dir < 0 || i == len(tr.Y)-1 && dir > 0 {
		return
	}
	k := i + tr.X0 - j.x0
	if k < 0 || k >= len(j.y) || math.IsNaN(j.y[k]) || math.Abs(j.y[k]-tr.Y[i]) > tol {
		return
	}
	// The fill stops where the trace across the boundary jumps by more
	// than tol from one column to the next: it has run onto a separator
	// tick or the next panel's lead.
	prev := tr.Y[i]
	for i += dir; i >= 0 && i < len(tr.Y) && math.IsNaN(tr.Y[i]); i += dir {
		k := i + tr.X0 - j.x0
		if k < 0 || k >= len(j.y) || math.IsNaN(j.y[k]) || math.Abs(j.y[k]-prev) > tol {
			return
		}
		tr.Y[i], tr.Conf[i] = j.y[k], j.conf[k]
		prev = j.y[k]
	}
}

// assemble builds the panels and traces of hypothesis h from row
// segments traced in nseg equal parts.
func (pg *page) assemble(h hypothesis, segs [][]segTrace, nseg int, override []string, fill bool) ([]Panel, []Trace) {
	names, prow, pcol, rhythm := leadGrid(h)
	ncols := layoutCols(h.layout)
	per := nseg / ncols
	colDur := (pg.segBounds(nseg, -1)[per] - pg.x0f) / pg.pxPerS
	var panels []Panel
	var traces []Trace
	for i, name := range names {
		r := prow[i]
		if r >= len(segs) {
			continue
		}
		s0, s1 := pcol[i]*per, (pcol[i]+1)*per
		if rhythm[i] {
			s0, s1 = 0, nseg
		}
		xs := pg.segBounds(nseg, r)
		bx0, bx1 := xs[s0], xs[s1]
		base := pg.rows[r].base
		tr := Trace{Lead: name, Panel: len(panels), X0: segs[r][s0].x0}
		for s := s0; s < s1; s++ {
			tr.Y = append(tr.Y, segs[r][s].y...)
			tr.Conf = append(tr.Conf, segs[r][s].conf...)
		}
		// Within a panel the lead runs on across segment boundaries (a
		// rhythm strip across the columns' too): the traces across them
		// fill the margins kept clear of separator ticks. At the panel's
		// own edges the trace across the boundary fills up to the
		// boundary where it meets the panel's trace.
		if fill {
			for s := s0 + 1; s < s1; s++ {
				fillJoin(&tr, segs[r][s].join)
			}
			tol := math.Max(2, 0.3*pg.pxPerMM)
			if s0 > 0 {
				fillEdge(&tr, segs[r][s0].join, -1, tol)
			}
			if s1 < nseg {
				fillEdge(&tr, segs[r][s1].join, +1, tol)
			}
		}
		if b := modeY(tr.Y); !math.IsNaN(b) {
			base = b
		}
		t0 := float64(pcol[i]) * colDur
		t1 := t0 + (bx1-bx0)/pg.pxPerS
		if rhythm[i] {
			t0, t1 = 0, (bx1-bx0)/pg.pxPerS
		}
		panels = append(panels, Panel{
			Lead: name, Row: r, Col: pcol[i], Rhythm: rhythm[i],
			Box: [4]float64{bx0, base - 0.58*pg.pitch, bx1, base + 0.42*pg.pitch},
			T0S: t0, T1S: t1, BaselineY: base,
		})
		traces = append(traces, tr)
	}
	nameRhythms(panels, traces)
	if len(override) > 0 {
		for i := range panels {
			if i < len(override) && strings.TrimSpace(override[i]) != "" {
				n := strings.TrimSpace(override[i])
				if !strings.HasPrefix(n, "-") {
					n = record.CanonicalLead(n)
				}
				panels[i].Lead, traces[i].Lead = n, n
			}
		}
	}
	return panels, traces
}

// nameRhythms names each rhythm strip after the panel it matches over
// that panel's window: the same lead drawn twice matches in shape and in
// size, so the match is the residual of the strip less the panel (means
// removed) relative to the panel's own spread. Correlation alone cannot
// tell II from aVF when the axis lies between them. Strips that match
// nothing keep their default name.
func nameRhythms(panels []Panel, traces []Trace) {
	for i := range panels {
		if !panels[i].Rhythm {
			continue
		}
		best, bestJ, bestSign := math.Inf(1), -1, 1.0
		for j := range panels {
			if panels[j].Rhythm {
				continue
			}
			signs := []float64{1}
			if strings.HasPrefix(panels[j].Lead, "-") {
				signs = append(signs, -1) // Cabrera's −aVR is aVR turned over
			}
			for _, sg := range signs {
				if e := relResidual(traces[i], traces[j], sg); e < best {
					best, bestJ, bestSign = e, j, sg
				}
			}
		}
		// 0.45: a relative residual of 0.45 is a correlation near 0.9
		// for a same-sized lead.
		if bestJ < 0 || best > 0.45 {
			continue
		}
		// The layout's usual lead for this strip (II; II, V1, V5 on
		// 3x4+3: common practice) is kept unless another panel matches
		// clearly better: neighbouring chest leads look alike, and the
		// tracing's own errors can tip the balance between them.
		if e, ok := residualTo(panels, traces, i, panels[i].Lead); ok && e <= 0.45 && e <= best+0.1 {
			continue
		}
		name := panels[bestJ].Lead
		if bestSign < 0 {
			name = strings.TrimPrefix(name, "-")
		}
		panels[i].Lead, traces[i].Lead = name, name
	}
}

// residualTo returns the relative residual between rhythm strip i and
// the panel printed as lead name, false when there is none.
func residualTo(panels []Panel, traces []Trace, i int, name string) (float64, bool) {
	for j := range panels {
		if j != i && !panels[j].Rhythm && panels[j].Lead == name {
			return relResidual(traces[i], traces[j], 1), true
		}
	}
	return 0, false
}

// relResidual is the RMS of a − sign·b over their common columns (means
// removed), relative to b's RMS about its mean; +Inf when they share too
// little.
func relResidual(a, b Trace, sign float64) float64 {
	lo, hi := max(a.X0, b.X0), min(a.X0+len(a.Y), b.X0+len(b.Y))
	var sa, sb, n float64
	for x := lo; x < hi; x++ {
		u, v := a.Y[x-a.X0], b.Y[x-b.X0]
		if math.IsNaN(u) || math.IsNaN(v) {
			continue
		}
		sa += u
		sb += v
		n++
	}
	if n < 10 {
		return math.Inf(1)
	}
	ma, mb := sa/n, sb/n
	var ee, bb float64
	for x := lo; x < hi; x++ {
		u, v := a.Y[x-a.X0], b.Y[x-b.X0]
		if math.IsNaN(u) || math.IsNaN(v) {
			continue
		}
		d := (u - ma) - sign*(v-mb)
		ee += d * d
		bb += (v - mb) * (v - mb)
	}
	if bb <= 0 {
		return math.Inf(1)
	}
	return math.Sqrt(ee / bb)
}

// windowsOf returns the column windows of simultaneous panels.
func windowsOf(panels []Panel) []window {
	seen := map[int]window{}
	for _, p := range panels {
		if p.Rhythm {
			continue
		}
		if _, ok := seen[p.Col]; !ok {
			seen[p.Col] = window{col: p.Col, t0: p.T0S, t1: p.T1S}
		}
	}
	var out []window
	for _, w := range seen {
		out = append(out, w)
	}
	if len(out) == 0 { // strips only: one window over the first strip
		for _, p := range panels {
			out = append(out, window{col: 0, t0: p.T0S, t1: p.T1S})
			break
		}
	}
	sort.Slice(out, func(i, j int) bool { return out[i].col < out[j].col })
	return out
}

// lawScore is the limb leads' relative disagreement with the laws:
// residual energy over signal energy, summed over the windows.
func lawScore(rec *record.Record, wins []window) float64 {
	var er, es float64
	for _, w := range wins {
		ls := gatherLimbs(rec, w)
		if len(ls.names) < 3 || ls.samples() < 10 {
			continue
		}
		all := make([]int, len(ls.names))
		for k := range all {
			all[k] = k
		}
		e := ls.residualEnergy(all)
		if math.IsNaN(e) {
			continue
		}
		er += e
		for _, y := range ls.y {
			for _, v := range y {
				es += v * v
			}
		}
	}
	if es == 0 {
		return 0
	}
	return er / es
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
