package batch

import (
	"bytes"
	"path/filepath"
	"strings"
	"testing"
)

func TestSummaryCSV(t *testing.T) {
	t.Parallel()
	f := NoFindings()
	f.HeartRateBPM, f.Transition, f.Verdict = 72.123456, "V3/V4", "care"
	rows := []Row{
		{File: "z.png", Status: StatusOK, Findings: f, Seconds: 2.5},
		{File: "a,b.png", Status: StatusFailed, Error: "calib: \"x\" failed\nsecond line", Findings: NoFindings(), Seconds: 0.1},
	}
	var buf bytes.Buffer
	if err := WriteSummary(&buf, rows); err != nil {
		t.Fatal(err)
	}
	// RFC 4180 §2: fields with commas, quotes or line breaks are quoted and
	// inner quotes doubled.
	want := "file,status,error,heart_rate_bpm,pr_ms,qrs_ms,qt_ms,qtc_bazett_ms,qrs_axis_deg,transition,median_lead_confidence,seconds,verdict\n" +
		"\"a,b.png\",failed,\"calib: \"\"x\"\" failed\nsecond line\",,,,,,,,,0.1,\n" +
		"z.png,ok,,72.123,,,,,,V3/V4,,2.5,care\n"
	if buf.String() != want {
		t.Errorf("summary:\n%s\nwant:\n%s", buf.String(), want)
	}
	back, err := ReadSummary(&buf)
	if err != nil || len(back) != 2 || back[0].Error != rows[1].Error || back[1].Findings.HeartRateBPM != 72.123 || back[1].Findings.Verdict != "care" {
		t.Errorf("read back %+v, %v", back, err)
	}
	if got := CountVerdicts(back); got != "ready 0, care 1, not_readable 0, no verdict 1" {
		t.Errorf("verdict counts %q", got)
	}
}

func TestMerge(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	write := func(name string, rows ...Row) string {
		p := filepath.Join(dir, name)
		if err := WriteSummaryFile(p, rows); err != nil {
			t.Fatal(err)
		}
		return p
	}
	ok := func(f string) Row { return Row{File: f, Status: StatusOK, Findings: NoFindings()} }
	bad := func(f string) Row { return Row{File: f, Status: StatusFailed, Error: "x", Findings: NoFindings()} }
	write("summary-1-of-4.csv", ok("a"), bad("b"))
	write("summary-2-of-4.csv", ok("c"), ok("b"))
	write("summary-4-of-4.csv", bad("d"))
	paths, err := FindSummaries([]string{dir})
	if err != nil || len(paths) != 3 {
		t.Fatalf("FindSummaries: %v, %v", paths, err)
	}
	rep, err := Merge(paths, []string{"a", "b", "c", "d", "e"})
	if err != nil {
		t.Fatal(err)
	}
	var files []string
	for _, r := range rep.Rows {
		files = append(files, r.File+":"+string(r.Status))
	}
	if strings.Join(files, " ") != "a:ok b:ok c:ok d:failed" {
		t.Errorf("merged %v", files)
	}
	if strings.Join(rep.Duplicates, ",") != "b" || strings.Join(rep.MissingShards, ",") != "3/4" ||
		strings.Join(rep.MissingFiles, ",") != "e" || len(rep.Failed) != 1 {
		t.Errorf("report %+v", rep)
	}
	if _, err := FindSummaries([]string{t.TempDir()}); err == nil {
		t.Error("an empty folder gave no error")
	}
	if _, err := FindSummaries([]string{filepath.Join(dir, "nothing-*.csv")}); err == nil {
		t.Error("a pattern matching nothing gave no error")
	}
}
