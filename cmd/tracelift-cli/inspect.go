package main

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"fmt"
	"gonum.org/v1/gonum/stat"
	"image"
	"image/color"
	"image/draw"
	"image/png"
	"io"
	"math"
	"os"
	"os/signal"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"syscall"

	"tracelift/pipeline"
	"tracelift/record"
	"tracelift/record/atomic"
	"tracelift/record/ledger"
	"tracelift/record/wfdb"
	"tracelift/samples"
)

func init() {
	register("inspect", "show how a page was read: the flattened page with its panels and traced lines, the ink map, and the numbers behind them", cmdInspect)
}

// cmdInspect reads one picture (or renders one case of the bench suite)
// and writes what each stage saw, for a person checking a reading:
// DIR/<stem>-page.png (the rectified page, panel boxes, baselines and the
// traced lines, a low-confidence stretch drawn in another colour),
// DIR/<stem>-ink.png (what calib counted as trace ink) and
// DIR/<stem>-inspect.txt (scale, settings, warnings, layout and per-lead
// confidence; for a bench case also the truth and each lead's score).
func cmdInspect(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("inspect", flag.ContinueOnError)
	var c commonFlags
	fs.StringVar(&c.out, "o", "", "output directory (required)")
	c.registerReading(fs)
	out := &c.out
	caseSpec := fs.String("case", "", "render case SEED:N of the bench suite instead of reading a picture")
	conds := fs.String("conditions", strings.Join(samples.AllConditions, ","), "with --case: the bench's condition list")
	ptb := fs.String("ptb", "../shared/data/ptb-s0010_re/s0010_re.hea", "with --case: the real record the suite renders in every fourth case")
	gridLog := fs.Bool("grid-log", false, "also report calib's grid search step by step (angles tried, tiles, fits, turns, pulses)")
	fs.Usage = usageFunc(fs, stderr,
		"usage: tracelift-cli inspect IMAGE -o DIR [reading options as for digitize]",
		"       tracelift-cli inspect --case SEED:N -o DIR [--conditions LIST] [--grid-log]",
		"Writes DIR/<stem>-page.png (the flattened page with the panels and traced lines drawn on it),",
		"DIR/<stem>-ink.png (the ink counted as trace) and DIR/<stem>-inspect.txt (the numbers).",
	)
	pos, code, ok := parseCommand(fs, args, stderr)
	if !ok {
		return code
	}
	c.seen(fs)
	if *out == "" {
		return usageError(stderr, "inspect", "-o DIR is required")
	}
	if (*caseSpec == "") == (len(pos) != 1) {
		return usageError(stderr, "inspect", "give one picture, or --case SEED:N and no picture")
	}
	if err := c.checkNumbers(); err != nil {
		return usageError(stderr, "inspect", err.Error())
	}
	var seed int64
	var caseN int
	if *caseSpec != "" {
		s, n, ok := strings.Cut(*caseSpec, ":")
		var err1, err2 error
		seed, err1 = strconv.ParseInt(s, 10, 64)
		caseN, err2 = strconv.Atoi(n)
		if !ok || err1 != nil || err2 != nil || caseN < 0 {
			return usageError(stderr, "inspect", fmt.Sprintf("--case %q: give SEED:N, for example 1:7", *caseSpec))
		}
		for _, c := range strings.Split(*conds, ",") {
			if !slices.Contains(samples.AllConditions, c) {
				return usageError(stderr, "inspect", fmt.Sprintf("--conditions: unknown condition %q (choose from %s)", c, strings.Join(samples.AllConditions, ", ")))
			}
		}
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	if err := os.MkdirAll(*out, 0o755); err != nil {
		fmt.Fprintln(stderr, "tracelift-cli inspect:", err)
		return 1
	}
	var (
		path  string
		truth *samples.Truth
	)
	if *caseSpec != "" {
		var real *record.Record
		if *ptb != "" {
			r, err := wfdb.ReadRecord(*ptb)
			if err != nil {
				fmt.Fprintf(stderr, "tracelift-cli inspect: --ptb: %v\n", err)
				return 1
			}
			real = r
		}
		sc := samples.NewSuiteCase(seed, caseN, strings.Split(*conds, ","), real)
		po, err := sc.Printout()
		if err != nil {
			fmt.Fprintln(stderr, "tracelift-cli inspect:", err)
			return 1
		}
		name, data, err := sc.File(po)
		if err != nil {
			fmt.Fprintln(stderr, "tracelift-cli inspect:", err)
			return 1
		}
		// The rendered picture is written too, so the page can be opened.
		name = fmt.Sprintf("case-%d-%d%s", seed, caseN, filepath.Ext(name))
		if err := writeOwned(*out, ledger.Source{Path: "bench case " + *caseSpec}, name, nil, func(w io.Writer) error {
			_, err := w.Write(data)
			return err
		}); err != nil {
			fmt.Fprintln(stderr, "tracelift-cli inspect:", err)
			return 1
		}
		path, truth = filepath.Join(*out, name), &po.Truth
		fmt.Fprintf(stdout, "case %d of seed %d: %s, %s, %s at %.0f dpi\n", caseN, seed, sc.Condition, sc.Source, sc.Style.Layout, sc.Style.DPI)
	} else {
		path = pos[0]
	}
	opt := c.options()
	var glog bytes.Buffer
	if *gridLog {
		opt.Calib.Trace = func(format string, a ...any) {
			fmt.Fprintf(&glog, "  "+format+"\n", a...)
		}
	}
	o, err := pipeline.Process(ctx, path, opt)
	var txt bytes.Buffer
	inspectReport(&txt, o, err, truth)
	if *gridLog {
		fmt.Fprintln(&txt, "grid search (calib, step by step)")
		txt.Write(glog.Bytes())
	}
	stem := pipeline.Stem(path)
	src := ledger.FileSource(path, 0)
	if truth != nil {
		src = ledger.Source{Path: "bench case " + *caseSpec}
	}
	type output struct {
		name  string
		write func(io.Writer) error
	}
	files := []output{{stem + "-inspect.txt", func(w io.Writer) error { _, err := w.Write(txt.Bytes()); return err }}}
	if o != nil && o.Calib != nil && o.Calib.Rectified != nil {
		files = append(files, output{stem + "-page.png", func(w io.Writer) error { return png.Encode(w, drawReading(o)) }})
		if o.Calib.Ink != nil {
			files = append(files, output{stem + "-ink.png", func(w io.Writer) error { return png.Encode(w, negative(o.Calib.Ink)) }})
		}
	}
	// All names are claimed before any is written: a refused one leaves
	// the folder as it was.
	var names []string
	for _, f := range files {
		names = append(names, f.name)
	}
	if err := ledger.Claim(*out, src, names, []string{path}); err != nil {
		fmt.Fprintln(stderr, "tracelift-cli inspect:", err)
		return 1
	}
	for _, f := range files {
		if err := atomic.WriteFile(filepath.Join(*out, f.name), f.write, 0o644); err != nil {
			fmt.Fprintln(stderr, "tracelift-cli inspect:", err)
			return 1
		}
		fmt.Fprintf(stdout, "wrote %s\n", filepath.Join(*out, f.name))
	}
	stdout.Write(txt.Bytes())
	if err != nil {
		if errors.Is(err, context.Canceled) {
			return 130
		}
		return 1
	}
	return 0
}

// writeOwned writes dir/name through the ledger (never over a file
// tracelift did not write for src, never over an input) and atomically.
func writeOwned(dir string, src ledger.Source, name string, inputs []string, write func(io.Writer) error) error {
	if err := ledger.Claim(dir, src, []string{name}, inputs); err != nil {
		return err
	}
	return atomic.WriteFile(filepath.Join(dir, name), write, 0o644)
}

// inspectReport writes the numbers behind a reading.
func inspectReport(w io.Writer, o *pipeline.Outcome, err error, truth *samples.Truth) {
	if truth != nil {
		fmt.Fprintf(w, "truth      %.3f × %.3f px/mm, rotation %.2f°, %g mm/mV, %g mm/s, layout %s\n",
			truth.PxPerMMX, truth.PxPerMMY, truth.RotationDeg, truth.GainMMPerMV, truth.SpeedMMPerS, truth.Layout)
	}
	if o != nil && o.Calib != nil {
		c := o.Calib
		fmt.Fprintf(w, "calib      %.3f × %.3f px/mm (page %.3f px/mm) from %s, confidence %.2f, rotation %.2f°, %d quarter turn(s), %g mm/mV, %g mm/s, %d pulse candidate(s), settings assumed %v\n",
			c.PxPerMMX, c.PxPerMMY, c.PxPerMM, c.Source, c.Confidence, c.RotationDeg, c.Turned, c.GainMMPerMV, c.SpeedMMPerS, len(c.Pulses), c.SettingsAssumed())
		for _, p := range c.Pulses {
			fmt.Fprintf(w, "  pulse    %.2f mm tall, %.2f mm wide at x %.0f–%.0f, y %.0f–%.0f px\n", p.HeightMM, p.WidthMM, p.Box[0], p.Box[2], p.Box[1], p.Box[3])
		}
		for _, s := range c.Warnings {
			fmt.Fprintf(w, "  warning  %s\n", s)
		}
	}
	if err != nil {
		fmt.Fprintf(w, "error      %v\n", err)
		return
	}
	d := o.Digitized
	fmt.Fprintf(w, "layout     %s (Cabrera %v), %d panels, time zero from %s\n", d.Layout, d.Cabrera, len(d.Panels), d.TimeZero)
	if d.Misfit != "" {
		fmt.Fprintf(w, "  misfit   %s\n", d.Misfit)
	}
	for _, l := range d.Laws {
		fmt.Fprintf(w, "  laws     %+v\n", l)
	}
	fmt.Fprintf(w, "verdict    %s\n", o.Verdict.Level)
	for _, r := range o.Verdict.Reasons {
		fmt.Fprintf(w, "  why      %s: %s\n", r.Code, r.Text)
	}
	var acc map[string]record.Accuracy
	if truth != nil {
		acc = map[string]record.Accuracy{}
		for _, a := range record.CompareRecordStrict(truth.Signals, d.Record) {
			acc[a.Lead] = a
		}
	}
	for _, p := range d.Panels {
		l := record.CanonicalLead(p.Lead)
		q := d.Quality[l]
		fmt.Fprintf(w, "panel %-4s row %d col %d box %.0f,%.0f–%.0f,%.0f  %.2f–%.2f s  confidence %.2f", p.Lead, p.Row, p.Col, p.Box[0], p.Box[1], p.Box[2], p.Box[3], p.T0S, p.T1S, q.Confidence)
		if a, ok := acc[l]; ok {
			fmt.Fprintf(w, "  SNR %5.1f dB  r %.3f  shift %+.0f ms  coverage %.2f  gain %.3f", a.SNRdB, a.R, 1000*a.ShiftS, a.Coverage, lsGain(truth.Signals.Lead(l), d.Record.Lead(l)))
			if lag, r := farLag(truth.Signals.Lead(l), d.Record.Lead(l), p.T0S, p.T1S); math.Abs(lag) > record.MaxShiftS {
				fmt.Fprintf(w, "  (best lag %+.0f ms, r %.3f)", 1000*lag, r)
			}
		}
		fmt.Fprintln(w)
	}
}

// lsGain is the least-squares gain of est against ref on ref's clock (1 is
// right; under 1, the estimate's waves are short), to tell a scale error
// from a shape error.
func lsGain(ref, est *record.Signal) float64 {
	if ref == nil || est == nil {
		return math.NaN()
	}
	var sre, see float64
	for k, v := range ref.MV {
		t := ref.StartS + float64(k)/ref.RateHz
		j := int(math.Round((t - est.StartS) * est.RateHz))
		if j >= 0 && j < len(est.MV) && !math.IsNaN(est.MV[j]) {
			sre += v * est.MV[j]
			see += est.MV[j] * est.MV[j]
		}
	}
	return sre / see
}

// farLag is the time shift of est within ±0.5 s, in 4 ms steps, that
// correlates best with ref over [t0, t1], and that correlation: a time 0
// or speed misread shows as a lag beyond the scoring's ±40 ms.
func farLag(ref, est *record.Signal, t0, t1 float64) (lag, best float64) {
	if ref == nil || est == nil {
		return 0, math.NaN()
	}
	best = math.Inf(-1)
	for sh := -0.5; sh <= 0.5+1e-9; sh += 0.004 {
		var a, b []float64
		for k, v := range ref.MV {
			t := ref.StartS + float64(k)/ref.RateHz
			if t < t0 || t > t1 {
				continue
			}
			j := int(math.Round((t + sh - est.StartS) * est.RateHz))
			if j >= 0 && j < len(est.MV) && !math.IsNaN(est.MV[j]) {
				a, b = append(a, v), append(b, est.MV[j])
			}
		}
		if len(a) < 50 {
			continue
		}
		if r := stat.Correlation(a, b, nil); r > best {
			lag, best = sh, r
		}
	}
	return lag, best
}

// Colours of the drawn reading: boxes in slate blue, baselines in grey,
// traced lines in a deep violet where the tracer is sure and in orange
// where its confidence is under one half (visible on red, green and blue
// grids alike).
var (
	boxInk   = color.RGBA{40, 60, 140, 255}
	baseInk  = color.RGBA{120, 120, 120, 255}
	sureInk  = color.RGBA{110, 0, 160, 255}
	doubtInk = color.RGBA{240, 120, 0, 255}
)

// drawReading draws the panels and traced lines over the rectified page.
func drawReading(o *pipeline.Outcome) *image.RGBA {
	src := o.Calib.Rectified
	b := src.Bounds()
	m := image.NewRGBA(b)
	draw.Draw(m, b, src, b.Min, draw.Src)
	// Lighten the page so the drawing stands out.
	for i := 0; i < len(m.Pix); i += 4 {
		for k := 0; k < 3; k++ {
			m.Pix[i+k] = uint8(128 + int(m.Pix[i+k])/2)
		}
	}
	if o.Digitized == nil {
		return m
	}
	for _, p := range o.Digitized.Panels {
		x0, y0, x1, y1 := int(p.Box[0]), int(p.Box[1]), int(p.Box[2]), int(p.Box[3])
		for x := x0; x <= x1; x++ {
			m.Set(x, y0, boxInk)
			m.Set(x, y1, boxInk)
			if (x/4)%2 == 0 {
				m.Set(x, int(p.BaselineY), baseInk)
			}
		}
		for y := y0; y <= y1; y++ {
			m.Set(x0, y, boxInk)
			m.Set(x1, y, boxInk)
		}
	}
	for _, t := range o.Digitized.Traces {
		py := math.NaN()
		for i, y := range t.Y {
			if math.IsNaN(y) {
				py = y
				continue
			}
			c := sureInk
			if i < len(t.Conf) && t.Conf[i] < 0.5 {
				c = doubtInk
			}
			x := t.X0 + i
			lo, hi := y, y
			if !math.IsNaN(py) {
				lo, hi = math.Min(y, py), math.Max(y, py)
			}
			for yy := int(math.Floor(lo)); yy <= int(math.Ceil(hi)); yy++ {
				m.Set(x, yy, c)
			}
			py = y
		}
	}
	return m
}

// negative returns ink as dark on light (255 = ink in calib's map).
func negative(g *image.Gray) *image.Gray {
	n := image.NewGray(g.Bounds())
	for i, v := range g.Pix {
		n.Pix[i] = 255 - v
	}
	return n
}
