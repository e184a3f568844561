package main

import (
	"context"
	"encoding/csv"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strconv"
	"strings"
	"time"

	"tracelift/axis"
	"tracelift/calib"
	"tracelift/pipeline"
	"tracelift/record"
	"tracelift/record/wfdb"
	"tracelift/samples"
	"tracelift/stats"
)

func init() {
	register("bench", "render a seeded suite of printouts, digitize them, print accuracy and speed", cmdBench)
}

// benchCase is one rendered printout and what became of it.
type benchCase struct {
	N         int
	Condition string
	Source    string // "dipole" or "ptb-s0010_re"
	Layout    string
	DPI       float64
	Err       string

	ScaleErrX, ScaleErrY float64 // relative |est − truth| / truth
	RotErrDeg            float64
	GainOK, SpeedOK      bool
	HasCalib             bool
	SNR                  []float64 // per standard lead drawn; −Inf when missing
	Missing              int
	AxisErr, HRErr       float64
	QRSErr, QTErr        float64
	CalibMS, DigitizeMS  float64
	MeasureMS, DecodeMS  float64
	Calib                calibCase // for --calib-table
}

func cmdBench(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("bench", flag.ContinueOnError)
	n := fs.Int("cases", 25, "number of rendered printouts")
	seed := fs.Int64("seed", 1, "seed of the suite (the same seed renders the same suite)")
	conds := fs.String("conditions", strings.Join(samples.AllConditions, ","), "conditions to cycle through")
	csvOut := fs.String("csv", "", "also write one row per case to this CSV file")
	ptb := fs.String("ptb", "../shared/data/ptb-s0010_re/s0010_re.hea", "a real 12-lead WFDB record to render in every fourth case (\"\" for none)")
	dpi := fs.Float64("dpi", 0, "render every case at this dpi (default: vary, 150–600)")
	outside := fs.String("outside", "", "instead of rendering, score the printouts of another renderer in this folder (outside*.json truth beside each picture)")
	truthCalib := fs.Bool("truth-calib", false, "calibrate from the renderer's truth instead of calib.Detect, to score the tracer alone")
	calibTable := fs.Bool("calib-table", false, "also print calib alone per condition: scale error where calib measured it, rotation, gain, speed, time and where the scale came from")
	fs.Usage = usageFunc(fs, stderr,
		"usage: tracelift-cli bench [options]",
	)
	if _, code, ok := parseCommand(fs, args, stderr); !ok {
		return code
	}
	if *calibTable && (*truthCalib || *outside != "") {
		return usageError(stderr, "bench", "--calib-table scores calib.Detect on the rendered suite; leave out --truth-calib and --outside")
	}
	if *outside != "" {
		if *truthCalib {
			return usageError(stderr, "bench", "--truth-calib scores the rendered suite; the outside printouts are read as any picture")
		}
		return benchOutside(*outside, stdout, stderr)
	}
	var condList []string
	for _, c := range strings.Split(*conds, ",") {
		c = strings.TrimSpace(c)
		if !slices.Contains(samples.AllConditions, c) {
			return usageError(stderr, "bench", fmt.Sprintf("--conditions: unknown condition %q (choose from %s)", c, strings.Join(samples.AllConditions, ", ")))
		}
		condList = append(condList, c)
	}
	if *n < 1 || *n > 100000 {
		return usageError(stderr, "bench", fmt.Sprintf("--cases %d: give 1 to 100000", *n))
	}
	if *dpi != 0 && !(*dpi >= 50 && *dpi <= 1200) {
		return usageError(stderr, "bench", fmt.Sprintf("--dpi %v: give 50 to 1200, or leave it out", *dpi))
	}
	var real *record.Record
	if *ptb != "" {
		r, err := wfdb.ReadRecord(*ptb)
		if err != nil {
			fmt.Fprintf(stderr, "bench: %v (continuing with synthetic records only)\n", err)
		} else {
			real = r
		}
	}
	if *truthCalib {
		fmt.Fprintln(stdout, "calibration: from the renderer's truth (scale, gain, speed, pulses, the page flattened through its page-to-image map, calib's ink map of it without the grid's positions); calib.Detect is not run, so the calib columns show no error")
	}
	var cases []benchCase
	start := time.Now()
	for i := 0; i < *n; i++ {
		c := runBenchCase(i, *seed, condList, real, *dpi, *truthCalib)
		cond := c.Condition
		cases = append(cases, c)
		status := "ok"
		if c.Err != "" {
			status = "failed: " + c.Err
		}
		fmt.Fprintf(stderr, "case %3d %-9s %-7s %-6s %3.0f dpi  SNR med %5.1f dB  %s\n", i, cond, c.Source, c.Layout, c.DPI, median(finite(c.SNR)), status)
	}
	printBenchTable(stdout, cases, condList)
	if *calibTable {
		printCalibTable(stdout, cases, condList)
	}
	fmt.Fprintf(stdout, "\n%d cases in %.1f s; peak resident memory %s\n", len(cases), time.Since(start).Seconds(), peakRSS())
	if *csvOut != "" {
		if err := writeBenchCSV(*csvOut, cases); err != nil {
			fmt.Fprintln(stderr, "bench:", err)
			return 1
		}
	}
	return 0
}

// runBenchCase renders case i of the suite, reads it as digitize reads a
// file (or, with truthCalib, traces it on the renderer's own calibration:
// see readWithTruth) and scores it against the truth.
func runBenchCase(i int, seed int64, conds []string, real *record.Record, dpi float64, truthCalib bool) benchCase {
	sc := samples.NewSuiteCase(seed, i, conds, real)
	c := benchCase{N: i, Condition: sc.Condition, Source: sc.Source}
	c.AxisErr, c.HRErr, c.QRSErr, c.QTErr = math.NaN(), math.NaN(), math.NaN(), math.NaN()
	truth := sc.Dipole
	if dpi > 0 {
		sc.Style.DPI = dpi
	}
	c.Layout, c.DPI = string(sc.Style.Layout), sc.Style.DPI
	clean, po, err := sc.Printouts()
	if err != nil {
		c.Err = err.Error()
		return c
	}
	// Encode as a file would arrive, then decode it like any input.
	name, data, err := sc.File(po)
	if err != nil {
		c.Err = err.Error()
		return c
	}
	var o *pipeline.Outcome
	if truthCalib {
		o, err = readWithTruth(clean, po, name, data)
	} else {
		o, err = readBenchFile(name, data)
	}
	if o != nil {
		c.DecodeMS = ms(o.Timings.Load)
		c.CalibMS, c.DigitizeMS, c.MeasureMS = ms(o.Timings.Calib), ms(o.Timings.Digitize), ms(o.Timings.Measure)
	}
	tr := po.Truth
	if o != nil && o.Calib != nil {
		c.HasCalib = true
		c.ScaleErrX = math.Abs(o.Calib.PxPerMMX-tr.PxPerMMX) / tr.PxPerMMX
		c.ScaleErrY = math.Abs(o.Calib.PxPerMMY-tr.PxPerMMY) / tr.PxPerMMY
		c.RotErrDeg = math.Abs(angleDiff(o.Calib.RotationDeg+90*float64(o.Calib.Turned), tr.RotationDeg))
		c.GainOK = math.Abs(o.Calib.GainMMPerMV-tr.GainMMPerMV) < 0.02*tr.GainMMPerMV
		c.SpeedOK = math.Abs(o.Calib.SpeedMMPerS-tr.SpeedMMPerS) < 0.02*tr.SpeedMMPerS
		c.Calib.Source = o.Calib.Source
		tx, ty, trot := tr.ScalesAt(o.Calib.ScaleAt[0], o.Calib.ScaleAt[1])
		c.Calib.LocalErr = [2]float64{math.Abs(o.Calib.PxPerMMX/tx - 1), math.Abs(o.Calib.PxPerMMY/ty - 1)}
		c.Calib.LocalRotErr = math.Abs(angleDiff(o.Calib.RotationDeg+90*float64(o.Calib.Turned), trot))
	}
	c.Calib.HasPulse = sc.Style.Pulses
	c.Calib.NoScale = errors.Is(err, calib.ErrNoScale)
	var est *record.Record
	if err != nil {
		c.Err = err.Error()
	} else {
		est = o.Digitized.Record
	}
	// Scored as a user meets the result (record.CompareStrict): a blank
	// counts as error and a lead not recovered, or a page that failed,
	// as 0 dB for each lead drawn.
	std := &record.Record{}
	for _, ref := range tr.Signals.Signals {
		if record.IsStandard(ref.Lead) {
			std.Signals = append(std.Signals, ref)
		}
	}
	for _, a := range record.CompareRecordStrict(std, est) {
		if est != nil && est.Lead(a.Lead) == nil {
			c.Missing++
		}
		c.SNR = append(c.SNR, a.SNRdB)
	}
	if err != nil {
		return c
	}
	if f := o.Findings; f != nil {
		var want axisTruth
		if truth != nil {
			want = axisTruth{truth.QRSAxisDeg, truth.HeartRateBPM, truth.QRSms, truth.QTms}
		} else if wf, err := axis.Measure(tr.Signals, axis.Options{}); err == nil {
			want = axisTruth{float64(wf.Axis.QRSDeg), float64(wf.HeartRateBPM), float64(wf.IntervalsMS.QRS), float64(wf.IntervalsMS.QT)}
		}
		c.AxisErr = math.Abs(angleDiff(float64(f.Axis.QRSDeg), want.qrs))
		c.HRErr = math.Abs(float64(f.HeartRateBPM) - want.hr)
		c.QRSErr = math.Abs(float64(f.IntervalsMS.QRS) - want.qrsMS)
		c.QTErr = math.Abs(float64(f.IntervalsMS.QT) - want.qtMS)
	}
	return c
}

type axisTruth struct{ qrs, hr, qrsMS, qtMS float64 }

// readBenchFile reads a case's file as digitize reads a file: a document
// of several pages (a fax with a cover sheet) is searched for its ECG
// page.
func readBenchFile(name string, data []byte) (*pipeline.Outcome, error) {
	dir, err := os.MkdirTemp("", "tracelift-bench-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, name)
	if err := os.WriteFile(path, data, 0o600); err != nil {
		return nil, err
	}
	return pipeline.Process(context.Background(), path, pipeline.Options{FindPage: true})
}

func printBenchTable(w io.Writer, cases []benchCase, conds []string) {
	fmt.Fprintln(w, "condition   cases fail  scale err %  (med/p95)  rot err° (med/max)  gain ok  speed ok  SNR dB (med/p10)  missing  axis err° (med/p95)  HR err  QRS err  QT err  ms/page (calib+trace, med)")
	groups := append(append([]string(nil), conds...), "all")
	for _, g := range groups {
		var sel []benchCase
		for _, c := range cases {
			if g == "all" || c.Condition == strings.TrimSpace(g) {
				sel = append(sel, c)
			}
		}
		if len(sel) == 0 {
			continue
		}
		var scale, rot, snr, ax, hr, qrs, qt, tms []float64
		fail, gain, speed, missing := 0, 0, 0, 0
		for _, c := range sel {
			if c.Err != "" {
				fail++
			}
			if c.HasCalib {
				scale = append(scale, 100*c.ScaleErrX, 100*c.ScaleErrY)
				rot = append(rot, c.RotErrDeg)
			}
			if c.GainOK {
				gain++
			}
			if c.SpeedOK {
				speed++
			}
			missing += c.Missing
			snr = append(snr, c.SNR...)
			ax = appendFinite(ax, c.AxisErr)
			hr = appendFinite(hr, c.HRErr)
			qrs = appendFinite(qrs, c.QRSErr)
			qt = appendFinite(qt, c.QTErr)
			if c.Err == "" {
				tms = append(tms, c.CalibMS+c.DigitizeMS+c.DecodeMS)
			}
		}
		fmt.Fprintf(w, "%-10s %6d %4d  %6.3f / %6.3f       %5.2f / %5.2f     %5.0f%%   %5.0f%%    %5.1f / %5.1f      %5d    %5.1f / %5.1f        %5.1f   %5.1f    %5.1f   %6.0f\n",
			g, len(sel), fail, median(scale), pct(scale, 95), median(rot), pct(rot, 100),
			100*float64(gain)/float64(len(sel)), 100*float64(speed)/float64(len(sel)),
			median(snr), pct(snr, 10), missing, median(ax), pct(ax, 95), median(hr), median(qrs), median(qt), median(tms))
	}
}

func writeBenchCSV(path string, cases []benchCase) error {
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	w := csv.NewWriter(f)
	w.Write([]string{"case", "condition", "source", "layout", "dpi", "error", "scale_err_x", "scale_err_y", "rot_err_deg", "gain_ok", "speed_ok", "snr_median_db", "missing", "axis_err_deg", "hr_err_bpm", "qrs_err_ms", "qt_err_ms", "decode_ms", "calib_ms", "digitize_ms", "measure_ms"})
	g := func(v float64) string { return strconv.FormatFloat(v, 'f', 4, 64) }
	for _, c := range cases {
		w.Write([]string{strconv.Itoa(c.N), c.Condition, c.Source, c.Layout, g(c.DPI), c.Err, g(c.ScaleErrX), g(c.ScaleErrY), g(c.RotErrDeg),
			strconv.FormatBool(c.GainOK), strconv.FormatBool(c.SpeedOK), g(median(finite(c.SNR))), strconv.Itoa(c.Missing),
			g(c.AxisErr), g(c.HRErr), g(c.QRSErr), g(c.QTErr), g(c.DecodeMS), g(c.CalibMS), g(c.DigitizeMS), g(c.MeasureMS)})
	}
	w.Flush()
	if err := w.Error(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

func ms(d time.Duration) float64 { return d.Seconds() * 1000 }

func angleDiff(a, b float64) float64 {
	d := math.Mod(a-b+540, 360) - 180
	return d
}

func finite(v []float64) []float64 {
	var out []float64
	for _, x := range v {
		out = appendFinite(out, x)
	}
	return out
}

func appendFinite(v []float64, x float64) []float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return v
	}
	return append(v, x)
}

func median(v []float64) float64 { return stats.Median(v) }

// pct is the p-th percentile by linear interpolation; NaN when empty.
func pct(v []float64, p float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	x := p / 100 * float64(len(s)-1)
	i := int(x)
	if i >= len(s)-1 {
		return s[len(s)-1]
	}
	return s[i] + (x-float64(i))*(s[i+1]-s[i])
}

// peakRSS reads the process's peak resident set size (Linux).
func peakRSS() string {
	b, err := os.ReadFile("/proc/self/status")
	if err != nil {
		return "unknown"
	}
	for _, line := range strings.Split(string(b), "\n") {
		if strings.HasPrefix(line, "VmHWM:") {
			return strings.TrimSpace(strings.TrimPrefix(line, "VmHWM:"))
		}
	}
	return "unknown"
}
