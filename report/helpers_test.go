package report

import (
	"bytes"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"tracelift/record"
	"tracelift/record/wfdb"
)

// ptbPath is the open PTB Diagnostic ECG Database record patient001/s0010_re
// (see ../../shared/data/README.md).
const ptbPath = "../../shared/data/ptb-s0010_re/s0010_re.hea"

func readPTB(t testing.TB) *record.Record {
	t.Helper()
	rec, err := wfdb.ReadRecord(ptbPath)
	if err != nil {
		t.Fatalf("reading %s: %v", ptbPath, err)
	}
	return rec
}

// needTool skips the test when a poppler tool is absent.
func needTool(t testing.TB, name string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		t.Skipf("%s not installed (Debian package poppler-utils)", name)
	}
	return p
}

// renderTo renders s on paper into a temporary file and returns its path.
// With REPORT_KEEP=dir the file is also copied there for a look by eye.
func renderTo(t testing.TB, s *Summary, paper string) string {
	t.Helper()
	var buf bytes.Buffer
	if err := Render(&buf, s, paper); err != nil {
		t.Fatalf("Render(%s): %v", paper, err)
	}
	dir := t.TempDir()
	p := filepath.Join(dir, "summary-"+paper+".pdf")
	if err := os.WriteFile(p, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	if keep := os.Getenv("REPORT_KEEP"); keep != "" {
		_ = os.WriteFile(filepath.Join(keep, filepath.Base(t.Name())+"-"+paper+".pdf"), buf.Bytes(), 0o644)
	}
	return p
}

func nan() float64 { return math.NaN() }
