package main

import (
	"flag"
	"fmt"
	"io"
	"os"
	"strings"

	"tracelift/axis"
	"tracelift/coverage"
	"tracelift/record"
	"tracelift/record/atomic"
	"tracelift/record/wfdb"
)

func init() {
	register("coverage", "check the stated 90 % intervals against the truth on rendered printouts (and fit the picture-error model)", cmdCoverage)
}

func cmdCoverage(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("coverage", flag.ContinueOnError)
	n := fs.Int("cases", 60, "number of rendered printouts")
	from := fs.Int("from", 0, "first case of the suite")
	seed := fs.Int64("seed", 1, "seed of the suite (the bench's suite)")
	conds := fs.String("conditions", "clean,rotated,photocopy,photo,fax", "conditions to cycle through")
	ptb := fs.String("ptb", "../shared/data/ptb-s0010_re/s0010_re.hea", "a real 12-lead WFDB record to render in every fourth case (\"\" for none)")
	fit := fs.Bool("fit", false, "also fit the picture-error model (sizes and the weights of the page's facts) to these cases, print it and the table under it")
	share := fs.Float64("share", 0.90, "with --fit, the share of cases the fitted intervals are to hold")
	penalty := fs.Float64("penalty", coverage.FactPenalty, "with --fit, the extra charge on the width the page's facts add (shrinkage)")
	restate := fs.Bool("restate", false, "state the intervals under this build's picture model before the table (for cases read with --from-csv that another build measured)")
	csvOut := fs.String("csv", "", "also write one row per case and measurement to this CSV file")
	csvIn := fs.String("from-csv", "", "read the cases from a CSV file written by --csv instead of rendering them")
	outside := fs.String("outside", "", "check the outside pages in this folder (outsideNN.json beside each picture) instead of the rendered suite")
	fs.Usage = usageFunc(fs, stderr,
		"usage: tracelift-cli coverage [options]",
	)
	if _, code, ok := parseCommand(fs, args, stderr); !ok {
		return code
	}
	if *n < 1 {
		return usageError(stderr, "coverage", "--cases must be at least 1")
	}
	var condList []string
	for _, c := range strings.Split(*conds, ",") {
		condList = append(condList, strings.TrimSpace(c))
	}
	var real *record.Record
	if *ptb != "" {
		r, err := wfdb.ReadRecord(*ptb)
		if err != nil {
			fmt.Fprintf(stderr, "coverage: %v (continuing with synthetic records only)\n", err)
		} else {
			real = r
		}
	}
	var cases []coverage.Case
	if *outside != "" {
		var err error
		cases, err = coverage.Outside(*outside)
		if err != nil {
			fmt.Fprintf(stderr, "tracelift-cli coverage: %v\n", err)
			return 1
		}
		for _, c := range cases {
			fmt.Fprintf(stderr, "%s %-8s %-6s %-12s %s %s\n", c.Source, c.Condition, c.Layout, c.Verdict, strings.Join(c.Reasons, " "), c.Err)
			for _, m := range coverage.Measures {
				if v, ok := c.Meas[m]; ok {
					fmt.Fprintf(stderr, "    %-15s %8.1f [%8.1f, %8.1f] truth %8.1f\n", m, v.Est, v.Lo, v.Hi, v.Truth)
				}
			}
		}
		condList = nil
		for _, c := range cases {
			if !contains(condList, c.Condition) {
				condList = append(condList, c.Condition)
			}
		}
	} else if *csvIn != "" {
		f, err := os.Open(*csvIn)
		if err != nil {
			fmt.Fprintf(stderr, "tracelift-cli coverage: %v\n", err)
			return 1
		}
		cases, err = coverage.ReadCSV(f)
		f.Close()
		if err != nil {
			fmt.Fprintf(stderr, "tracelift-cli coverage: %s: %v\n", *csvIn, err)
			return 1
		}
	} else {
		cases = coverage.Run(*seed, *from, *n, condList, real, nil, stderr)
	}
	if *restate {
		cases = coverage.Restate(cases, axis.DefaultPictureModel)
	}
	if *csvOut != "" {
		err := atomic.WriteFile(*csvOut, func(w io.Writer) error { return coverage.WriteCSV(w, cases) }, 0o644)
		if err != nil {
			fmt.Fprintf(stderr, "tracelift-cli coverage: %v\n", err)
			return 1
		}
	}
	coverage.Table(stdout, cases, condList)
	if *fit {
		if !(*share > 0 && *share < 1) {
			return usageError(stderr, "coverage", "--share must lie between 0 and 1")
		}
		coverage.FactPenalty = *penalty
		m := coverage.FitPage(cases, axis.DefaultPictureModel, *share)
		fmt.Fprintf(stdout, "\nfitted picture model (%.0f %% on these cases):\n%#v\n\nunder it:\n", 100**share, m)
		coverage.Table(stdout, coverage.Restate(cases, m), condList)
	}
	return 0
}

func contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
}
