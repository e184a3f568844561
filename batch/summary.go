package batch

import (
	"encoding/csv"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"

	"tracelift/record/atomic"
)

// SummaryHeader is the first line of every summary CSV.
var SummaryHeader = []string{"file", "status", "error", "heart_rate_bpm", "pr_ms", "qrs_ms", "qt_ms",
	"qtc_bazett_ms", "qrs_axis_deg", "transition", "median_lead_confidence", "seconds", "verdict"}

// Row is one line of a summary.
type Row struct {
	File     string // Input.Rel
	Status   Status
	Error    string
	Findings Findings
	Seconds  float64
}

func (r Row) record() []string {
	f := r.Findings
	return []string{r.File, string(r.Status), r.Error, formatNum(f.HeartRateBPM), formatNum(f.PRMS),
		formatNum(f.QRSMS), formatNum(f.QTMS), formatNum(f.QTcBazettMS), formatNum(f.QRSAxisDeg),
		f.Transition, formatNum(f.MedianLeadConfidence), formatNum(r.Seconds), f.Verdict}
}

// Verdicts are the three page verdicts in order (pipeline.Judge).
var Verdicts = []string{"ready", "care", "not_readable"}

// CountVerdicts counts the rows' pages by verdict, in words for a
// terminal: "ready 12, care 3, not_readable 1" (and "no verdict N" for
// pages without one, such as failed ones).
func CountVerdicts(rows []Row) string {
	n := map[string]int{}
	for _, r := range rows {
		n[r.Findings.Verdict]++
	}
	var parts []string
	for _, v := range Verdicts {
		parts = append(parts, fmt.Sprintf("%s %d", v, n[v]))
		delete(n, v)
	}
	other := 0
	for _, c := range n {
		other += c
	}
	if other > 0 {
		parts = append(parts, fmt.Sprintf("no verdict %d", other))
	}
	return strings.Join(parts, ", ")
}

// WriteSummary writes rows, sorted by file, as CSV.
func WriteSummary(w io.Writer, rows []Row) error {
	rows = append([]Row(nil), rows...)
	sort.SliceStable(rows, func(a, b int) bool { return rows[a].File < rows[b].File })
	cw := csv.NewWriter(w)
	if err := cw.Write(SummaryHeader); err != nil {
		return err
	}
	for _, r := range rows {
		if err := cw.Write(r.record()); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// WriteSummaryFile writes the summary at path atomically.
func WriteSummaryFile(path string, rows []Row) error {
	if err := refuseLink(path); err != nil {
		return err
	}
	return atomic.WriteFile(path, func(w io.Writer) error { return WriteSummary(w, rows) }, 0o644)
}

// ReadSummary reads a summary CSV written by WriteSummary.
func ReadSummary(r io.Reader) ([]Row, error) {
	cr := csv.NewReader(r)
	head, err := cr.Read()
	if err != nil {
		return nil, fmt.Errorf("batch: summary: %w", err)
	}
	col := map[string]int{}
	for i, h := range head {
		col[h] = i
	}
	for _, h := range []string{"file", "status"} {
		if _, ok := col[h]; !ok {
			return nil, fmt.Errorf("batch: summary: no %q column; is this a tracelift summary?", h)
		}
	}
	cell := func(rec []string, name string) string {
		if i, ok := col[name]; ok && i < len(rec) {
			return rec[i]
		}
		return ""
	}
	var rows []Row
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			return rows, nil
		}
		if err != nil {
			return nil, fmt.Errorf("batch: summary: %w", err)
		}
		f := NoFindings()
		f.HeartRateBPM = parseNum(cell(rec, "heart_rate_bpm"))
		f.PRMS = parseNum(cell(rec, "pr_ms"))
		f.QRSMS = parseNum(cell(rec, "qrs_ms"))
		f.QTMS = parseNum(cell(rec, "qt_ms"))
		f.QTcBazettMS = parseNum(cell(rec, "qtc_bazett_ms"))
		f.QRSAxisDeg = parseNum(cell(rec, "qrs_axis_deg"))
		f.Transition = cell(rec, "transition")
		f.MedianLeadConfidence = parseNum(cell(rec, "median_lead_confidence"))
		f.Verdict = cell(rec, "verdict")
		rows = append(rows, Row{File: cell(rec, "file"), Status: Status(cell(rec, "status")),
			Error: cell(rec, "error"), Findings: f, Seconds: parseNum(cell(rec, "seconds"))})
	}
}

// SummaryName is the summary file name of shard k of n ("summary.csv"
// when not sharded).
func SummaryName(k, n int) string {
	if n <= 1 {
		return "summary.csv"
	}
	return fmt.Sprintf("summary-%d-of-%d.csv", k, n)
}

// LogName is the log file name of shard k of n.
func LogName(k, n int) string {
	if n <= 1 {
		return "batch-log.jsonl"
	}
	return fmt.Sprintf("batch-log-%d-of-%d.jsonl", k, n)
}

var shardName = regexp.MustCompile(`^summary-(\d+)-of-(\d+)\.csv$`)

// MergeReport says what Merge found.
type MergeReport struct {
	Rows       []Row    // one per file, sorted
	Sources    []string // summary files read
	Duplicates []string // files found in more than one summary
	// MissingShards lists "K/N" for shards of a sharded run with no summary.
	MissingShards []string
	// MissingFiles lists expected files that no summary mentions (only when
	// Merge was given the expected list).
	MissingFiles []string
	Failed       []Row
}

// FindSummaries expands the merge arguments: a folder contributes its
// summary-K-of-N.csv files (or its summary.csv when it has none), a file is
// taken as it is, and a pattern with * ? [ is globbed.
func FindSummaries(args []string) ([]string, error) {
	var out []string
	seen := map[string]bool{}
	add := func(p string) {
		if !seen[p] {
			seen[p] = true
			out = append(out, p)
		}
	}
	for _, a := range args {
		if strings.ContainsAny(a, "*?[") {
			m, err := filepath.Glob(a)
			if err != nil {
				return nil, fmt.Errorf("batch: pattern %q: %w", a, err)
			}
			if len(m) == 0 {
				return nil, fmt.Errorf("batch: %q matches no file", a)
			}
			for _, p := range m {
				add(p)
			}
			continue
		}
		fi, err := os.Stat(a)
		if err != nil {
			return nil, fmt.Errorf("batch: %w", err)
		}
		if !fi.IsDir() {
			add(a)
			continue
		}
		m, _ := filepath.Glob(filepath.Join(a, "summary-*-of-*.csv"))
		if len(m) == 0 {
			p := filepath.Join(a, "summary.csv")
			if _, err := os.Stat(p); err != nil {
				return nil, fmt.Errorf("batch: %s holds no summary CSV; is it a batch output folder?", a)
			}
			m = []string{p}
		}
		for _, p := range m {
			add(p)
		}
	}
	return out, nil
}

// MaxShards bounds N in summary-K-of-N.csv and in --shard K/N: a job
// array of a hundred thousand tasks is already far beyond any archive a
// shard per page would need, and listing missing shards stays small.
const MaxShards = 100_000

// Merge joins summaries. A file in more than one summary is listed in
// Duplicates and kept once (its "ok" or "skipped" row before a failed one,
// else the first). Shard file names (summary-K-of-N.csv) are checked for
// completeness; expected, when not nil, lists the files that should appear.
func Merge(paths []string, expected []string) (*MergeReport, error) {
	rep := &MergeReport{Sources: paths}
	byFile := map[string]int{}
	shards := map[int]map[int]bool{}
	for _, p := range paths {
		if m := shardName.FindStringSubmatch(filepath.Base(p)); m != nil {
			k, err1 := strconv.Atoi(m[1])
			n, err2 := strconv.Atoi(m[2])
			if err1 != nil || err2 != nil || n < 1 || n > MaxShards || k < 1 || k > n {
				return nil, fmt.Errorf("batch: %s names shard %s of %s; a batch has 1 to %d shards, K from 1 to N: rename or remove it", p, m[1], m[2], MaxShards)
			}
			if shards[n] == nil {
				shards[n] = map[int]bool{}
			}
			shards[n][k] = true
		}
		f, err := os.Open(p)
		if err != nil {
			return nil, fmt.Errorf("batch: %w", err)
		}
		rows, err := ReadSummary(f)
		f.Close()
		if err != nil {
			return nil, fmt.Errorf("%w (in %s)", err, p)
		}
		for _, r := range rows {
			i, dup := byFile[r.File]
			if !dup {
				byFile[r.File] = len(rep.Rows)
				rep.Rows = append(rep.Rows, r)
				continue
			}
			rep.Duplicates = append(rep.Duplicates, r.File)
			if rep.Rows[i].Status == StatusFailed && r.Status != StatusFailed {
				rep.Rows[i] = r
			}
		}
	}
	for n, ks := range shards {
		for k := 1; k <= n; k++ {
			if !ks[k] {
				rep.MissingShards = append(rep.MissingShards, fmt.Sprintf("%d/%d", k, n))
			}
		}
	}
	sort.Strings(rep.MissingShards)
	docs := map[string]bool{} // the documents whose pages have rows
	for f := range byFile {
		docs[DocumentOf(f)] = true
	}
	for _, e := range expected {
		if _, ok := byFile[e]; !ok && !docs[e] {
			rep.MissingFiles = append(rep.MissingFiles, e)
		}
	}
	sort.Slice(rep.Rows, func(a, b int) bool { return rep.Rows[a].File < rep.Rows[b].File })
	for _, r := range rep.Rows {
		if r.Status == StatusFailed {
			rep.Failed = append(rep.Failed, r)
		}
	}
	sort.Strings(rep.Duplicates)
	return rep, nil
}
