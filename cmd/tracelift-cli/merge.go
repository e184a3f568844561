package main

import (
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"tracelift/batch"
	"tracelift/pipeline"
	"tracelift/record/ledger"
)

func init() {
	register("merge", "join the summaries of batch shards into one, reporting duplicates and gaps", cmdMerge)
}

func cmdMerge(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("merge", flag.ContinueOnError)
	out := fs.String("o", "", "folder for the joined summary.csv (required)")
	inputs := fs.String("inputs", "", "INPUT_DIR or LIST.txt of the batch: also report files that no summary mentions")
	base := fs.String("base", "", "with --inputs LIST.txt: the folder its paths are relative to")
	fs.Usage = usageFunc(fs, stderr,
		"usage: tracelift-cli merge OUT1 OUT2 …|'OUT/summary-*-of-*.csv' -o DIR [--inputs INPUT_DIR|LIST.txt]",
		"Joins batch summaries (a folder stands for its summary-K-of-N.csv files) into DIR/summary.csv,",
		"reporting files found twice, shards without a summary and, with --inputs, files never done.",
		"Exit status: 0 complete and every file done, 1 something is missing, doubled or failed, 2 usage error.",
	)
	pos, code, ok := parseCommand(fs, args, stderr)
	if !ok {
		return code
	}
	usageErr := func(msg string) int { return usageError(stderr, "merge", msg) }
	if len(pos) == 0 {
		return usageErr("give the batch output folders or summary files to join")
	}
	if *out == "" {
		return usageErr("-o DIR is required")
	}
	paths, err := batch.FindSummaries(pos)
	if err != nil {
		return usageErr(err.Error())
	}
	var expected []string
	if *inputs != "" {
		ins, err := batch.Collect(*inputs, batch.CollectOptions{Base: *base, Skip: append([]string{*out}, pos...)})
		if err != nil {
			return usageErr(err.Error())
		}
		for _, in := range ins {
			expected = append(expected, in.Rel)
		}
	}
	rep, err := batch.Merge(paths, expected)
	if err != nil {
		fmt.Fprintln(stderr, "tracelift-cli merge:", err)
		return 1
	}
	if err := os.MkdirAll(*out, 0o755); err != nil {
		fmt.Fprintln(stderr, "tracelift-cli merge:", err)
		return 1
	}
	dst := filepath.Join(*out, "summary.csv")
	for _, p := range paths {
		if same(p, dst) {
			return usageErr(dst + " is one of the summaries being joined; choose another -o folder")
		}
	}
	if err := ledger.Claim(*out, ledger.Source{Path: "a merge of batch summaries"}, []string{"summary.csv"}, paths); err != nil {
		fmt.Fprintln(stderr, "tracelift-cli merge:", err)
		return 1
	}
	if err := batch.WriteSummaryFile(dst, rep.Rows); err != nil {
		fmt.Fprintln(stderr, "tracelift-cli merge:", err)
		return 1
	}
	fmt.Fprintf(stdout, "joined %d summaries: %d files, %d failed\n", len(paths), len(rep.Rows), len(rep.Failed))
	fmt.Fprintf(stdout, "pages by verdict: %s\n", batch.CountVerdicts(rep.Rows))
	fmt.Fprintln(stdout, "wrote", dst)
	fmt.Fprintln(stdout, pipeline.Caution)
	bad := false
	list := func(title string, items []string) {
		if len(items) == 0 {
			return
		}
		bad = true
		fmt.Fprintf(stderr, "%s (%d):\n", title, len(items))
		for i, s := range items {
			if i == 50 {
				fmt.Fprintf(stderr, "  … and %d more\n", len(items)-50)
				break
			}
			fmt.Fprintln(stderr, " ", s)
		}
	}
	list("shards without a summary: run them, then merge again", rep.MissingShards)
	list("files in more than one summary (kept once): the shards overlap; were they run with different inputs?", rep.Duplicates)
	list("files that no summary mentions: run their shard again", rep.MissingFiles)
	var failed []string
	for _, r := range rep.Failed {
		failed = append(failed, r.File+": "+r.Error)
	}
	list("failed files", failed)
	if bad {
		return 1
	}
	return 0
}

func same(a, b string) bool {
	fa, err1 := os.Stat(a)
	fb, err2 := os.Stat(b)
	return err1 == nil && err2 == nil && os.SameFile(fa, fb)
}
