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
	"syscall"

	"tracelift/axis"
	"tracelift/pipeline"
	"tracelift/record"
	"tracelift/record/atomic"
	"tracelift/record/ledger"
)

func init() {
	register("measure", "measure a record (WFDB .hea or CSV): rate, intervals, axes, transition", cmdMeasure)
}

// cmdMeasure reads each RECORD, prints its summary and writes
// DIR/<stem>.json with the findings.
func cmdMeasure(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("measure", flag.ContinueOnError)
	out := fs.String("o", "", "output directory for <stem>.json (required)")
	beatLead := fs.String("beat-lead", "", "lead to find the beats on (default: the clearest long lead)")
	quiet := fs.Bool("q", false, "do not print the summary")
	fs.Usage = usageFunc(fs, stderr,
		"usage: tracelift-cli measure RECORD.hea|RECORD.csv [...] -o DIR [--beat-lead II] [-q]",
	)
	files, code, ok := parseCommand(fs, args, stderr)
	if !ok {
		return code
	}
	if len(files) == 0 || *out == "" {
		fs.Usage()
		return 2
	}
	stems := map[string]string{}
	for _, path := range files {
		st := strings.ToLower(measureStem(path))
		if prev, ok := stems[st]; ok {
			return usageError(stderr, "measure", fmt.Sprintf("%s and %s would both be written as %s.json; measure them into different -o folders", prev, path, measureStem(path)))
		}
		stems[st] = path
	}
	if err := os.MkdirAll(*out, 0o755); err != nil {
		fmt.Fprintf(stderr, "measure: cannot create the output directory: %v\n", err)
		return 1
	}
	// An interrupt stops between records; the record being written is
	// finished (atomically), so nothing is left half-written.
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	failed := 0
	for _, path := range files {
		if ctx.Err() != nil {
			fmt.Fprintln(stderr, "measure: interrupted; records not measured yet were left out")
			return 1
		}
		if err := measureOne(path, *out, *beatLead, *quiet, stdout); err != nil {
			fmt.Fprintf(stderr, "measure: %s: %v\n", path, err)
			failed++
		}
	}
	if failed > 0 {
		return 1
	}
	return 0
}

// readRecord opens a WFDB header (".hea", or a path without extension
// whose .hea exists) or a CSV file (pipeline.ReadRecordFile).
func readRecord(path string) (*record.Record, error) { return pipeline.ReadRecordFile(path) }

func measureOne(path, dir, beatLead string, quiet bool, stdout io.Writer) error {
	rec, err := readRecord(path)
	if err != nil {
		return err
	}
	f, err := axis.Measure(rec, axis.Options{BeatLead: beatLead})
	if err != nil {
		return err
	}
	stem := measureStem(path)
	dst := filepath.Join(dir, stem+".json")
	if err := ledger.Claim(dir, ledger.FileSource(path, 0), []string{stem + ".json"}, []string{path, path + ".hea"}); err != nil {
		return err
	}
	err = atomic.WriteFile(dst, func(w io.Writer) error {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(f)
	}, 0o644)
	if err != nil {
		return fmt.Errorf("writing %s: %w", dst, err)
	}
	if !quiet {
		fmt.Fprint(stdout, f.Summary())
		fmt.Fprintf(stdout, "written: %s\n\n", dst)
	}
	return nil
}

// measureStem is the output name of a record: its file name without the
// extension.
func measureStem(path string) string {
	return strings.TrimSuffix(filepath.Base(path), filepath.Ext(path))
}
