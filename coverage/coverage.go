// Package coverage checks the stated 90 % intervals of the measurements
// against the truth on rendered printouts: each case of the seeded bench
// suite (samples.NewSuiteCase) is drawn, encoded as a file, decoded and
// run through the whole pipeline, and its findings are compared with the
// measurement engine's findings on the exact signals the picture was
// drawn from. It also fits the picture-error model (axis.PictureModel)
// so that the intervals hold 90 % of the truth.
//
// Not a diagnostic device; every measurement is to be reviewed by a
// qualified clinician.
package coverage

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"tracelift/axis"
	"tracelift/pipeline"
	"tracelift/record"
	"tracelift/samples"
)

// Measures lists the measurements checked, by their JSON names.
var Measures = []string{"heart_rate_bpm", "pr", "qrs", "qt", "qtc_bazett", "qrs_deg"}

// Meas is one measurement of one case.
type Meas struct {
	Est, Lo, Hi float64 // value and 90 % interval
	// Truth is the generator's value for a dipole record (its rate,
	// intervals and QRS axis) and the engine's reading of the exact
	// signals for a real record, which has no other truth.
	Truth float64
	// Exact is always the engine's reading of the exact signals the
	// picture was drawn from: its difference is the picture's alone.
	Exact     float64
	EngineSD  float64 // the engine's own share (axis.Findings.SpreadSD)
	PictureSD float64 // the picture's share, at the model in use
	// Unit is the picture's share at a model size of 1 and a factor of 1
	// (axis.Findings.PictureUnitSD), for refitting the model.
	Unit float64
}

// Err is est − truth (wrapped to ±180° for angles).
func (m Meas) Err(measure string) float64 { return diff(measure, m.Est, m.Truth) }

func diff(measure string, a, b float64) float64 {
	d := a - b
	if measure == "qrs_deg" {
		d = math.Mod(d+540, 360) - 180
	}
	return d
}

// Case is one rendered page and what became of it.
type Case struct {
	N         int
	Condition string
	Source    string
	Layout    string
	Err       string
	Verdict   pipeline.Level
	Reasons   []string
	Meas      map[string]Meas
	// GeneratorAxisDeg is the dipole's own QRS axis (NaN for a real
	// record), for a second look at the axis's coverage.
	GeneratorAxisDeg float64
	// Page is what the pipeline knew of the page (pipeline.PictureFacts)
	// and MeanConf the mean lead confidence the measurements used: the
	// inputs of each measurement's picture factor.
	Page     axis.Picture
	MeanConf float64
	// Doubts are what the measurements said against themselves
	// (axis.Findings.TimeScaleRatio, axis.RateDisagrees).
	Doubts axis.Doubts
}

// Run draws and measures cases [from, from+n) of the suite for seed.
// real, when not nil, is drawn in every fourth case (as the bench does).
func Run(seed int64, from, n int, conds []string, real *record.Record, model *axis.PictureModel, progress io.Writer) []Case {
	var out []Case
	for i := from; i < from+n; i++ {
		c := runCase(seed, i, conds, real, model)
		if progress != nil {
			fmt.Fprintf(progress, "case %3d %-9s %-6s %-12s %s\n", i, c.Condition, c.Layout, c.Verdict, c.Err)
		}
		out = append(out, c)
	}
	return out
}

func runCase(seed int64, i int, conds []string, real *record.Record, model *axis.PictureModel) Case {
	sc := samples.NewSuiteCase(seed, i, conds, real)
	c := Case{N: i, Condition: sc.Condition, Source: sc.Source, Layout: string(sc.Style.Layout), GeneratorAxisDeg: math.NaN()}
	if sc.Dipole != nil {
		c.GeneratorAxisDeg = sc.Dipole.QRSAxisDeg
	}
	po, err := sc.Printout()
	if err != nil {
		c.Err = err.Error()
		return c
	}
	name, data, err := sc.File(po)
	if err != nil {
		c.Err = err.Error()
		return c
	}
	// Read as digitize and the bench read a file: a document of several
	// pages (a fax with its cover sheet) is searched for its ECG page.
	dir, err := os.MkdirTemp("", "tracelift-coverage-")
	if err != nil {
		c.Err = err.Error()
		return c
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, name)
	if err := os.WriteFile(path, data, 0o600); err != nil {
		c.Err = err.Error()
		return c
	}
	opt := pipeline.Options{FindPage: true}
	opt.Measure.Picture.Model = model
	o, err := pipeline.Process(context.Background(), path, opt)
	if err != nil {
		c.Err = err.Error()
		c.Verdict = pipeline.NotReadable
		return c
	}
	c.Verdict = o.Verdict.Level
	for _, r := range o.Verdict.Reasons {
		c.Reasons = append(c.Reasons, r.Code)
	}
	if o.Findings == nil {
		return c
	}
	c.Page, c.MeanConf = pipeline.PictureFacts(o.Calib, o.Digitized), o.Findings.MeanLeadConfidence
	c.Doubts = axis.Doubts{TimeRatio: o.Findings.TimeScaleRatio, Rate: axis.RateDisagrees(o.Findings)}
	truth, err := axis.Measure(sc.Record, axis.Options{})
	if err != nil {
		c.Err = "truth: " + err.Error()
		return c
	}
	c.Meas = Compare(o.Findings, truth)
	if d := sc.Dipole; d != nil {
		rr := 60 / d.HeartRateBPM
		gen := map[string]float64{"heart_rate_bpm": d.HeartRateBPM, "pr": d.PRms, "qrs": d.QRSms, "qt": d.QTms,
			"qtc_bazett": d.QTms / math.Sqrt(rr), "qrs_deg": d.QRSAxisDeg}
		for k, m := range c.Meas {
			m.Truth = gen[k]
			c.Meas[k] = m
		}
	}
	return c
}

// Compare pairs each measure of est with its interval and the truth.
func Compare(est, truth *axis.Findings) map[string]Meas {
	out := map[string]Meas{}
	put := func(name string, v axis.Num, ci [2]axis.Num, tv axis.Num) {
		if !v.OK() || !ci[0].OK() || !tv.OK() {
			return
		}
		m := Meas{Est: float64(v), Lo: float64(ci[0]), Hi: float64(ci[1]), Truth: float64(tv), Exact: float64(tv),
			EngineSD: float64(est.SpreadSD[name]), PictureSD: float64(est.PictureSD[name]), Unit: float64(est.PictureUnitSD[name])}
		if !est.SpreadSD[name].OK() {
			m.EngineSD = 0
		}
		if !est.PictureUnitSD[name].OK() {
			m.Unit = 0
		}
		out[name] = m
	}
	iv, tv := est.IntervalsMS, truth.IntervalsMS
	put("heart_rate_bpm", est.HeartRateBPM, est.HeartRateCI90, truth.HeartRateBPM)
	put("pr", iv.PR, iv.PRCI90, tv.PR)
	put("qrs", iv.QRS, iv.QRSCI90, tv.QRS)
	put("qt", iv.QT, iv.QTCI90, tv.QT)
	put("qtc_bazett", iv.QTcBazett, iv.QTcBazettCI90, tv.QTcBazett)
	put("qrs_deg", est.Axis.QRSDeg, est.Axis.QRSDegCI90, truth.Axis.QRSDeg)
	return out
}

// covered reports whether the interval holds the truth (on the circle
// for the axis, whose intervals are symmetric).
func covered(measure string, m Meas) bool {
	if isAngle(measure) {
		h := (m.Hi - m.Lo) / 2
		return math.Abs(m.Err(measure)) <= h+1e-9
	}
	return m.Lo-1e-9 <= m.Truth && m.Truth <= m.Hi+1e-9
}

// Exact returns the cases with the truth replaced by the engine's
// reading of the exact signals.
func Exact(cases []Case) []Case {
	out := make([]Case, len(cases))
	for i, c := range cases {
		c.Meas = map[string]Meas{}
		for k, m := range cases[i].Meas {
			m.Truth = m.Exact
			c.Meas[k] = m
		}
		out[i] = c
	}
	return out
}

// Coverage is the share of cases whose interval holds the truth.
type Coverage struct {
	N, Held int
}

// Share is Held/N, NaN when N is 0.
func (c Coverage) Share() float64 {
	if c.N == 0 {
		return math.NaN()
	}
	return float64(c.Held) / float64(c.N)
}

// Tally counts coverage per measure over the cases that pass keep.
func Tally(cases []Case, keep func(Case) bool) map[string]Coverage {
	out := map[string]Coverage{}
	for _, c := range cases {
		if !keep(c) {
			continue
		}
		for name, m := range c.Meas {
			cv := out[name]
			cv.N++
			if covered(name, m) {
				cv.Held++
			}
			out[name] = cv
		}
	}
	return out
}

// Readable keeps the cases whose verdict lets them be read.
func Readable(c Case) bool { return c.Err == "" && c.Verdict != pipeline.NotReadable }

// Table writes the coverage by measurement and condition over the pages
// that may be read, and the verdicts by condition.
func Table(w io.Writer, cases []Case, conds []string) {
	CoverageTable(w, cases, conds, "the true value: the generator's for dipole records, the engine on the exact signals for real ones")
	fmt.Fprintln(w)
	CoverageTable(w, Exact(cases), conds, "the engine's reading of the exact signals (the picture's error alone)")
	fmt.Fprintln(w)
	HalfWidths(w, cases, conds)
	Verdicts(w, cases, conds)
}

// CoverageTable writes the coverage by measurement and condition over
// the pages that may be read.
func CoverageTable(w io.Writer, cases []Case, conds []string, against string) {
	groups := append(append([]string(nil), conds...), "all")
	fmt.Fprintf(w, "90 %% interval coverage against %s\n(pages not marked not_readable; target 85-97 %%; cases in brackets)\n%-10s", against, "condition")
	for _, m := range Measures {
		fmt.Fprintf(w, " %14s", m)
	}
	fmt.Fprintln(w)
	for _, g := range groups {
		in := func(c Case) bool { return g == "all" || c.Condition == g }
		t := Tally(cases, func(c Case) bool { return in(c) && Readable(c) })
		fmt.Fprintf(w, "%-10s", g)
		for _, m := range Measures {
			cv := t[m]
			fmt.Fprintf(w, " %5.1f%% (%3d)  ", 100*cv.Share(), cv.N)
		}
		fmt.Fprintln(w)
	}
}

// Verdicts writes the count of pages by verdict and condition, and how
// often each reason was given.
func Verdicts(w io.Writer, cases []Case, conds []string) {
	groups := append(append([]string(nil), conds...), "all")
	fmt.Fprintf(w, "\nverdicts\n%-10s %6s %6s %13s %7s\n", "condition", "ready", "care", "not_readable", "failed")
	for _, g := range groups {
		var r, ca, nr, f int
		for _, c := range cases {
			if g != "all" && c.Condition != g {
				continue
			}
			switch {
			case c.Err != "":
				f++
			case c.Verdict == pipeline.Ready:
				r++
			case c.Verdict == pipeline.Care:
				ca++
			default:
				nr++
			}
		}
		fmt.Fprintf(w, "%-10s %6d %6d %13d %7d\n", g, r, ca, nr, f)
	}
	// Reasons, for tuning the verdict.
	count := map[string]int{}
	for _, c := range cases {
		for _, r := range c.Reasons {
			count[r]++
		}
	}
	var keys []string
	for k := range count {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	var parts []string
	for _, k := range keys {
		parts = append(parts, fmt.Sprintf("%s %d", k, count[k]))
	}
	fmt.Fprintf(w, "reasons: %s\n", strings.Join(parts, ", "))
}
