package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tracelift/record"
	"tracelift/record/csvio"
	"tracelift/record/wfdb"
)

// The compare command on PTB s0010_re (PTB Diagnostic ECG Database,
// PhysioNet): its WFDB header against a CSV of its own 10 s from 10 s on
// raises nothing and writes the JSON and a PDF; usage mistakes exit 2,
// unreadable inputs exit 1 naming the file.
func TestCompareCLI(t *testing.T) {
	dir := t.TempDir()
	hea := "../../../shared/data/ptb-s0010_re/s0010_re.hea"
	rec, err := wfdb.ReadRecord(hea)
	if err != nil {
		t.Fatal(err)
	}
	later := filepath.Join(dir, "later.csv")
	var buf bytes.Buffer
	if err := csvio.Write(&buf, rec.Window(record.Standard12, 500, 10, 10), 500); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(later, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "out")
	var so, se bytes.Buffer
	if code := run([]string{"compare", hea, later, "-o", out}, &so, &se); code != 0 {
		t.Fatalf("exit %d: %s", code, se.String())
	}
	if !strings.HasPrefix(so.String(), "A comparison of two digitized tracings is no diagnosis") {
		t.Errorf("the summary does not start with the caution:\n%s", so.String())
	}
	b, err := os.ReadFile(filepath.Join(out, "s0010_re-vs-later.json"))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Raised     int                        `json:"raised"`
		Caution    string                     `json:"caution"`
		Changes    []map[string]any           `json:"changes"`
		Thresholds map[string]json.RawMessage `json:"thresholds"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Raised != 0 || doc.Caution == "" || len(doc.Changes) < 50 || len(doc.Thresholds) == 0 {
		t.Errorf("raised %d, caution %q, %d changes, %d thresholds", doc.Raised, doc.Caution, len(doc.Changes), len(doc.Thresholds))
	}
	pdf, err := os.ReadFile(filepath.Join(out, "s0010_re-vs-later.pdf"))
	if err != nil || !bytes.HasPrefix(pdf, []byte("%PDF-")) {
		t.Errorf("no PDF written (%v)", err)
	}

	for _, tc := range []struct {
		name string
		args []string
		code int
		says string
	}{
		{"one tracing", []string{"compare", hea, "-o", out}, 2, "exactly two"},
		{"no output", []string{"compare", hea, later}, 2, "-o DIR"},
		{"bad paper", []string{"compare", hea, later, "-o", out, "--paper", "a5"}, 2, "a4 or letter"},
		{"missing file", []string{"compare", filepath.Join(dir, "none.png"), later, "-o", out}, 1, "none.png"},
		{"JSON without its CSV", []string{"compare", writeFile(t, dir, "lone.json", `{"file":"x.png","quality":{"II":{"confidence":1}}}`), later, "-o", out}, 1, "lone.csv"},
		{"not a record", []string{"compare", writeFile(t, dir, "notes.txt", "hello"), later, "-o", out}, 1, "notes.txt"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var so, se bytes.Buffer
			code := run(tc.args, &so, &se)
			if code != tc.code || !strings.Contains(se.String(), tc.says) {
				t.Errorf("exit %d (want %d), stderr %q (want it to say %q)", code, tc.code, se.String(), tc.says)
			}
		})
	}
}

func writeFile(t *testing.T, dir, name, text string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}
