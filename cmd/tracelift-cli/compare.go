package main

import (
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"strings"

	"tracelift/compare"
	"tracelift/pipeline"
	"tracelift/record/atomic"
	"tracelift/report"
)

func init() {
	register("compare", "compare a tracing with an earlier one of the same person: changes beyond their uncertainty", cmdCompare)
}

// cmdCompare compares B (the current tracing) with A (the earlier one) and
// writes DIR/<A>-vs-<B>.json and .pdf.
func cmdCompare(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("compare", flag.ContinueOnError)
	out := fs.String("o", "", "output directory (required)")
	paper := fs.String("paper", "a4", "paper size of the PDF: a4 or letter")
	dpi := fs.Float64("dpi", 0, "scale of a picture by hand, in dots per inch (used when no grid or pulse gives one)")
	fs.Usage = usageFunc(fs, stderr,
		"usage: tracelift-cli compare EARLIER CURRENT -o DIR [--paper a4|letter] [--dpi N]",
		"Each tracing is a picture (PNG, JPEG, TIFF, PDF), a record file (WFDB .hea, CSV, EDF+)",
		"or a JSON written by 'digitize' with its CSV beside it. Writes DIR/<A>-vs-<B>.json and .pdf.",
	)
	pos, code, ok := parseCommand(fs, args, stderr)
	if !ok {
		return code
	}
	if len(pos) != 2 {
		return usageError(stderr, "compare", "give exactly two tracings: the earlier one, then the current one")
	}
	if *out == "" {
		return usageError(stderr, "compare", "-o DIR is required")
	}
	if _, err := report.PaperByName(*paper); err != nil {
		return usageError(stderr, "compare", fmt.Sprintf("--paper %q: a4 or letter", *paper))
	}
	if *dpi < 0 || *dpi > 10000 {
		return usageError(stderr, "compare", fmt.Sprintf("--dpi %v: give a resolution between 1 and 10000", *dpi))
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	var sides [2]compare.Side
	for i, p := range pos {
		s, err := loadSide(ctx, p, *dpi)
		if err != nil {
			if strings.Contains(err.Error(), filepath.Base(p)) {
				fmt.Fprintf(stderr, "tracelift-cli compare: %v\n", err)
			} else {
				fmt.Fprintf(stderr, "tracelift-cli compare: %s: %v\n", p, err)
			}
			return 1
		}
		sides[i] = s
	}
	res, err := compare.Compare(sides[0], sides[1], compare.Options{})
	if err != nil {
		fmt.Fprintf(stderr, "tracelift-cli compare: %s against %s: %v\n", pos[1], pos[0], err)
		return 1
	}
	if err := os.MkdirAll(*out, 0o755); err != nil {
		fmt.Fprintf(stderr, "tracelift-cli compare: cannot create the output directory: %v\n", err)
		return 1
	}
	stem := pipeline.Stem(pos[0]) + "-vs-" + pipeline.Stem(pos[1])
	jsonPath := filepath.Join(*out, stem+".json")
	pdfPath := filepath.Join(*out, stem+".pdf")
	for _, dst := range []string{jsonPath, pdfPath} {
		for _, in := range inputFiles(pos) {
			if sameFile(dst, in) {
				fmt.Fprintf(stderr, "tracelift-cli compare: %s would overwrite the input %s; choose another -o DIR\n", dst, in)
				return 1
			}
		}
	}
	err = atomic.WriteFile(jsonPath, func(w io.Writer) error {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(struct {
			*compare.Result
			Thresholds map[string]compare.Threshold `json:"thresholds"`
		}{res, compare.Thresholds})
	}, 0o644)
	if err != nil {
		fmt.Fprintf(stderr, "tracelift-cli compare: writing %s: %v\n", jsonPath, err)
		return 1
	}
	err = atomic.WriteFile(pdfPath, func(w io.Writer) error { return report.ComparePDF(w, res, *paper) }, 0o644)
	if err != nil {
		fmt.Fprintf(stderr, "tracelift-cli compare: writing %s: %v\n", pdfPath, err)
		return 1
	}
	fmt.Fprint(stdout, compareBrief(res))
	fmt.Fprintln(stdout, "wrote", jsonPath)
	fmt.Fprintln(stdout, "wrote", pdfPath)
	return 0
}

// compareBrief is the terminal summary: the caution first, then what was
// raised.
func compareBrief(r *compare.Result) string {
	var b strings.Builder
	fmt.Fprintln(&b, r.Caution)
	fmt.Fprintf(&b, "A: %s\nB: %s\n", r.Before.Label, r.After.Label)
	if r.Exchange != nil {
		fmt.Fprintf(&b, "likely exchange: %s (compared with it undone)\n", r.Exchange.Text)
	}
	fmt.Fprintf(&b, "raised     %d change(s)\n", r.Raised)
	for _, c := range r.RaisedChanges() {
		fmt.Fprintf(&b, "  %s: %s\n", strings.ReplaceAll(c.Kind, "_", " "), c.Message)
	}
	for _, n := range r.Notes {
		fmt.Fprintf(&b, "note       %s\n", n)
	}
	return b.String()
}

// loadSide reads one tracing through the pipeline's one reader of
// tracings (pipeline.ReadTracing): a picture is digitized, a record file
// read, our JSON taken with the CSV written beside it.
func loadSide(ctx context.Context, path string, dpi float64) (compare.Side, error) {
	s := compare.Side{Label: filepath.Base(path)}
	if _, err := os.Stat(path); err != nil && !(filepath.Ext(path) == "" && exists(path+".hea")) {
		return s, fmt.Errorf("cannot read it: %w", err)
	}
	var opt pipeline.Options
	opt.Calib.UserDPI = dpi
	t, err := pipeline.ReadTracing(ctx, path, opt)
	if err != nil {
		if pipeline.IsPicture(path) {
			return s, namingFile(err, path)
		}
		return s, err
	}
	return compare.Side{Label: t.Label, Record: t.Record, Findings: t.Findings, Quality: t.Quality, Digitized: t.Digitized}, nil
}

// inputFiles lists the files each input stands for (a JSON's CSV, a WFDB
// header's signal files among them).
func inputFiles(pos []string) []string {
	var out []string
	for _, p := range pos {
		out = append(out, p)
		base := strings.TrimSuffix(p, filepath.Ext(p))
		for _, ext := range []string{".csv", ".hea", ".dat", ".json", ".pdf"} {
			if exists(base + ext) {
				out = append(out, base+ext)
			}
		}
	}
	return out
}

func exists(p string) bool {
	_, err := os.Stat(p)
	return err == nil
}

// sameFile reports whether a and b name one existing file.
func sameFile(a, b string) bool {
	fa, err := os.Stat(a)
	if err != nil {
		return false
	}
	fb, err := os.Stat(b)
	if err != nil {
		return false
	}
	return os.SameFile(fa, fb)
}
