package main

import (
	"bytes"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

// inspect on a bench case writes the rendered picture, the drawn reading,
// the ink map and the numbers, and scores each lead against what the
// renderer drew: on the clean case 0 of seed 1 (3x4+1 at 200 dpi) every
// lead scores well (the bench reads it at 29.9 dB median), and with
// --grid-log the report follows calib's grid search to the grid the
// renderer drew. Run again into
// the same folder it replaces its own files; a file of the user's of the
// same name is refused and left as it was.
func TestInspectBenchCase(t *testing.T) {
	if testing.Short() {
		t.Skip("renders and reads a page")
	}
	dir := t.TempDir()
	var out, errb bytes.Buffer
	args := []string{"inspect", "--case", "1:0", "--ptb", "../../../shared/data/ptb-s0010_re/s0010_re.hea", "--grid-log", "-o", dir}
	if code := run(args, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	for _, n := range []string{"case-1-0.png", "case-1-0-page.png", "case-1-0-ink.png", "case-1-0-inspect.txt"} {
		if fi, err := os.Stat(filepath.Join(dir, n)); err != nil || fi.Size() == 0 {
			t.Errorf("%s not written: %v", n, err)
		}
	}
	txt := out.String()
	for _, want := range []string{"truth ", "calib ", "layout     3x4+1", "verdict    ", "grid search (calib, step by step)\n", ": grid found true, rms "} {
		if !strings.Contains(txt, want) {
			t.Errorf("report lacks %q:\n%s", want, txt)
		}
	}
	snr := regexp.MustCompile(`panel (\S+) .* SNR +(-?[0-9.]+) dB`)
	n := 0
	for _, m := range snr.FindAllStringSubmatch(txt, -1) {
		n++
		if v, _ := strconv.ParseFloat(m[2], 64); v < 15 {
			t.Errorf("lead %s scores %.1f dB on the clean case", m[1], v)
		}
	}
	if n < 12 {
		t.Errorf("%d leads scored, want 12 or more:\n%s", n, txt)
	}
	if code := run(args, &out, &errb); code != 0 {
		t.Fatalf("second run: exit %d: %s", code, errb.String())
	}
	// A file of the user's in the way.
	other := t.TempDir()
	mine := filepath.Join(other, "case-1-0-inspect.txt")
	if err := os.WriteFile(mine, []byte("my notes"), 0o644); err != nil {
		t.Fatal(err)
	}
	errb.Reset()
	if code := run([]string{"inspect", "--case", "1:0", "--ptb", args[4], "-o", other}, &out, &errb); code == 0 {
		t.Errorf("wrote over a file it did not write")
	}
	unchanged(t, mine, []byte("my notes"))
}

// Usage mistakes stop before any work, with exit 2.
func TestInspectUsage(t *testing.T) {
	for _, args := range [][]string{
		{"inspect", "-o", t.TempDir()},
		{"inspect", "x.png"},
		{"inspect", "--case", "1", "-o", t.TempDir()},
		{"inspect", "--case", "1:2", "x.png", "-o", t.TempDir()},
		{"inspect", "--case", "1:2", "--conditions", "bogus", "-o", t.TempDir()},
		{"inspect", "x.png", "--layout", "4x4", "-o", t.TempDir()},
	} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 2 {
			t.Errorf("%q: exit %d, want 2 (%s)", args, code, errb.String())
		}
	}
}
