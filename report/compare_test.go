package report

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"tracelift/compare"
	"tracelift/record"
	"tracelift/record/wfdb"
)

// The comparison page of PTB s0010_re (PTB Diagnostic ECG Database,
// PhysioNet) against its own later 10 s is one page that carries the
// caution and says that nothing was raised; poppler's pdftotext reads it
// back.
func TestComparePDF(t *testing.T) {
	rec, err := wfdb.ReadRecord("../../shared/data/ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	a := rec.Window(record.Standard12, 500, 0, 10)
	b := rec.Window(record.Standard12, 500, 10, 10)
	r, err := compare.Compare(compare.Side{Label: "first", Record: a}, compare.Side{Label: "later", Record: b}, compare.Options{})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := ComparePDF(&buf, r, "a4"); err != nil {
		t.Fatal(err)
	}
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Skip("pdftotext (poppler-utils) not installed")
	}
	p := filepath.Join(t.TempDir(), "c.pdf")
	if err := os.WriteFile(p, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command("pdftotext", "-layout", p, "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Join(strings.Fields(string(out)), " ")
	for _, want := range []string{"A comparison of two digitized tracings is no diagnosis", "CHANGES RAISED: 0", "V6"} {
		if !strings.Contains(text, want) {
			t.Errorf("page lacks %q:\n%s", want, text)
		}
	}
	if n := strings.Count(string(out), "\f"); n != 1 {
		t.Errorf("%d pages, want 1", n)
	}
}
