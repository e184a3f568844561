package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"strings"
	"syscall"

	"tracelift/digitize"
	"tracelift/pipeline"
	"tracelift/record"
	"tracelift/record/ledger"
	"tracelift/report"
)

func init() {
	register("digitize", "trace an ECG image into signals, measure them, write exports", cmdDigitize)
}

// commonFlags are the options shared by digitize and batch.
type commonFlags struct {
	out     string
	formats string
	rate    float64
	layout  string
	order   string
	dpi     float64
	pxPerMM float64
	gain    float64
	speed   float64
	page    int
	// pageGiven: --page was given; without it a document of several
	// pages is searched for its first ECG page.
	pageGiven bool
	maxMP     float64
	maxMB     float64
	paper     string
}

func (c *commonFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&c.out, "o", "", "output directory (required)")
	fs.StringVar(&c.formats, "format", "csv,json", "comma-separated exports: csv, wfdb, edf, json, pdf")
	fs.StringVar(&c.paper, "paper", "a4", "paper size of the PDF summary: a4 or letter")
	c.registerReading(fs)
}

// registerReading registers the options that steer how a page is read
// (scale, settings, layout, page, limits), checked by checkNumbers; the
// commands that read pages without exporting them (inspect) take these
// alone.
func (c *commonFlags) registerReading(fs *flag.FlagSet) {
	fs.Float64Var(&c.rate, "rate", 500, "output sample rate in Hz")
	fs.StringVar(&c.layout, "layout", "", "force the layout: "+record.LayoutNames(record.Layouts)+" (default: find it)")
	fs.StringVar(&c.order, "order", "", "force the lead order: standard or cabrera (default: find it)")
	fs.Float64Var(&c.dpi, "dpi", 0, "scale by hand, in dots per inch (used when no grid or pulse gives one)")
	fs.Float64Var(&c.pxPerMM, "px-per-mm", 0, "scale by hand, in pixels per mm (used when no grid or pulse gives one)")
	fs.Float64Var(&c.gain, "gain", 0, "gain stated on the printout in mm/mV (checked against the pulse)")
	fs.Float64Var(&c.speed, "speed", 0, "paper speed stated on the printout in mm/s (checked against the pulse)")
	fs.IntVar(&c.page, "page", 1, "page of a multi-page TIFF or PDF (1-based; default: the first page that holds an ECG)")
	fs.Float64Var(&c.maxMP, "max-megapixels", 200, "refuse images larger than this many megapixels")
	fs.Float64Var(&c.maxMB, "max-megabytes", 200, "refuse files larger than this many megabytes")
}

func (c *commonFlags) options() pipeline.Options {
	var o pipeline.Options
	o.Load.Page = c.page - 1
	o.FindPage = !c.pageGiven
	o.Load.MaxPixels = int64(c.maxMP * 1e6)
	o.Load.MaxBytes = int64(c.maxMB * 1e6)
	o.Calib.UserDPI = c.dpi
	o.Calib.UserPxPerMM = c.pxPerMM
	o.Calib.StatedGainMMPerMV = c.gain
	o.Calib.StatedSpeedMMPerS = c.speed
	o.Digitize.RateHz = c.rate
	o.Digitize.Layout = c.layout
	o.Digitize.LeadOrder = c.order
	return o
}

// seen notes which options the command line gave (after parsing fs).
func (c *commonFlags) seen(fs *flag.FlagSet) {
	fs.Visit(func(f *flag.Flag) {
		if f.Name == "page" {
			c.pageGiven = true
		}
	})
}

func (c *commonFlags) check() error {
	if c.out == "" {
		return errors.New("-o DIR is required")
	}
	if _, err := pipeline.ParseFormats(c.formats); err != nil {
		return err
	}
	switch strings.ToLower(c.paper) {
	case "a4", "letter":
	default:
		return fmt.Errorf("--paper %q: a4 or letter", c.paper)
	}
	return c.checkNumbers()
}

// checkNumbers refuses option values no page can have, before any file is
// read (the options registerReading registers). 0 means "not given" for
// the hand-given scale and settings.
func (c *commonFlags) checkNumbers() error {
	if !(c.rate >= 50 && c.rate <= 10000) {
		return fmt.Errorf("--rate %v: give a rate between 50 and 10000 Hz", c.rate)
	}
	if c.page < 1 {
		return fmt.Errorf("--page %d: pages count from 1", c.page)
	}
	for _, r := range []struct {
		name, unit string
		v, lo, hi  float64
	}{
		// Scans and photos of paper lie between fax (about 100 dpi) and
		// archival scans (a few thousand dpi).
		{"--dpi", "dots per inch", c.dpi, 20, 10000},
		{"--px-per-mm", "pixels per mm", c.pxPerMM, 20 / 25.4, 10000 / 25.4},
		// Gains and speeds printed on electrocardiographs: 2.5 to 40 mm/mV
		// and 5 to 100 mm/s (common practice); the bounds leave room.
		{"--gain", "mm/mV", c.gain, 1, 100},
		{"--speed", "mm/s", c.speed, 1, 500},
	} {
		if r.v != 0 && !(r.v >= r.lo && r.v <= r.hi) {
			return fmt.Errorf("%s %v: give a value between %g and %g %s, or leave it out", r.name, r.v, r.lo, r.hi, r.unit)
		}
	}
	// Limits under one pixel or one byte would be read as no limit.
	if !(c.maxMP >= 1e-6 && c.maxMP <= 1e5) {
		return fmt.Errorf("--max-megapixels %v: give a number from 0.000001 to 100000", c.maxMP)
	}
	if !(c.maxMB >= 1e-6 && c.maxMB <= 1e6) {
		return fmt.Errorf("--max-megabytes %v: give a number from 0.000001 to 1000000", c.maxMB)
	}
	if err := digitize.CheckOptions(c.options().Digitize); err != nil {
		return fmt.Errorf("--layout/--order: %w", err)
	}
	return nil
}

func cmdDigitize(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("digitize", flag.ContinueOnError)
	var c commonFlags
	c.register(fs)
	fs.Usage = usageFunc(fs, stderr,
		"usage: tracelift-cli digitize IMAGE -o DIR [options]",
		"Reads a PNG, JPEG, TIFF (fax too) or PDF page of an ECG printout and writes DIR/<stem>.csv,",
		"DIR/<stem>.json and the other chosen exports. Of a TIFF or PDF of several pages it reads the",
		"first page that holds an ECG (a cover sheet is passed over) unless --page chooses one.",
	)
	pos, code, ok := parseCommand(fs, args, stderr)
	if !ok {
		return code
	}
	c.seen(fs)
	if len(pos) != 1 {
		fmt.Fprintln(stderr, "tracelift-cli digitize: give exactly one image file")
		fs.Usage()
		return 2
	}
	if err := c.check(); err != nil {
		fmt.Fprintln(stderr, "tracelift-cli digitize:", err)
		return 2
	}
	formats, _ := pipeline.ParseFormats(c.formats)
	stem := outputStem(pos[0], formats)
	if err := precheckOutputs(c.out, stem, formats, pos[0]); err != nil {
		fmt.Fprintln(stderr, "tracelift-cli digitize:", err)
		return 1
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	o, err := pipeline.Process(ctx, pos[0], c.options())
	if err != nil {
		fmt.Fprintln(stderr, "tracelift-cli digitize:", namingFile(err, pos[0]))
		return 1
	}
	files, err := pipeline.Export(o, c.out, stem, formats, pipeline.ExportOptions{RateHz: c.rate, Paper: c.paper, PDF: report.Write})
	if err != nil {
		fmt.Fprintln(stderr, "tracelift-cli digitize:", namingFile(err, pos[0]))
		return 1
	}
	fmt.Fprint(stdout, o.Brief())
	for _, f := range files {
		fmt.Fprintln(stdout, "wrote", f)
	}
	return 0
}

// outputStem is the output file name of the image at path without
// extension: its own stem, with characters a WFDB record name may not hold
// made '_' when WFDB is among the formats (as batch does), so that no export
// fails half-way on the name.
func outputStem(path string, formats []string) string {
	stem := pipeline.Stem(path)
	for _, f := range formats {
		if f == pipeline.FormatWFDB {
			return plainName(stem)
		}
	}
	return stem
}

// plainName keeps letters, digits, '_', '-' and '.'; others become '_'.
func plainName(s string) string {
	s = strings.Map(func(r rune) rune {
		if r == '_' || r == '-' || r == '.' || r >= '0' && r <= '9' || r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' {
			return r
		}
		return '_'
	}, s)
	if s == "" || s == "." || s == ".." {
		s = "record"
	}
	return s
}

// precheckOutputs refuses, before the image is read, an output folder
// where an export would replace the input or a file tracelift did not
// write. (Whether an output of tracelift there belongs to this very page is
// known once the page is loaded; Export checks that.)
func precheckOutputs(dir, stem string, formats []string, input string) error {
	if fi, err := os.Stat(dir); err != nil || !fi.IsDir() {
		return nil // made by Export, or refused there with its reason
	}
	err := ledger.Check(dir, ledger.FileSource(input, 0), pipeline.OutputNames(stem, formats), []string{input})
	if err != nil && !errors.Is(err, ledger.ErrOtherSource) {
		return err
	}
	return nil
}
