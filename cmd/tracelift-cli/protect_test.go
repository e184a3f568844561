package main

// What the user brought is never overwritten, special files are never
// read, and usage mistakes stop before any work: the cases a careless or
// unlucky user met, run through the built tool.

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

func copyFile(t *testing.T, src, dst string) {
	t.Helper()
	b, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(dst, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// unchanged fails when the file at p no longer holds want.
func unchanged(t *testing.T, p string, want []byte) {
	t.Helper()
	got, err := os.ReadFile(p)
	if err != nil {
		t.Errorf("%s: %v", p, err)
		return
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s was overwritten (%d bytes, was %d)", p, len(got), len(want))
	}
}

func TestOutputsNeverReplaceInputs(t *testing.T) {
	clean := demo(t, "hillcrest_clean_300dpi.png")

	t.Run("PDF summary into the scan's own folder", func(t *testing.T) {
		dir := t.TempDir()
		scan := filepath.Join(dir, "scan.pdf")
		pdf := pdfOf(t, clean)
		os.WriteFile(scan, pdf, 0o644)
		code, _, stderr := cli(t, 60*time.Second, "digitize", scan, "-o", dir, "--format", "csv,json,pdf")
		noCrash(t, stderr)
		if code != 1 || !strings.Contains(stderr, "input") {
			t.Errorf("exit %d: %s", code, stderr)
		}
		unchanged(t, scan, pdf)
		if _, err := os.Stat(filepath.Join(dir, "scan.csv")); err == nil {
			t.Error("the CSV was written before the refusal")
		}
	})

	t.Run("WFDB export over a WFDB record of the same name", func(t *testing.T) {
		// The MIT-BIH record 100 (PhysioNet, ../../../shared/data/mitdb-100).
		dir := t.TempDir()
		orig := map[string][]byte{}
		for _, ext := range []string{".hea", ".dat", ".atr"} {
			copyFile(t, "../../../shared/data/mitdb-100/100"+ext, filepath.Join(dir, "100"+ext))
			orig[ext], _ = os.ReadFile(filepath.Join(dir, "100"+ext))
		}
		img := filepath.Join(t.TempDir(), "100.png")
		os.WriteFile(img, clean, 0o644)
		code, _, stderr := cli(t, 60*time.Second, "digitize", img, "-o", dir, "--format", "csv,wfdb")
		noCrash(t, stderr)
		if code != 1 || !strings.Contains(stderr, "not written by tracelift") {
			t.Errorf("exit %d: %s", code, stderr)
		}
		for ext, b := range orig {
			unchanged(t, filepath.Join(dir, "100"+ext), b)
		}
	})

	t.Run("an output name linked to the input", func(t *testing.T) {
		in := filepath.Join(t.TempDir(), "scan.png")
		os.WriteFile(in, clean, 0o644)
		out := t.TempDir()
		os.Symlink(in, filepath.Join(out, "scan.json"))
		code, _, stderr := cli(t, 60*time.Second, "digitize", in, "-o", out)
		if code != 1 || !strings.Contains(stderr, "input") {
			t.Errorf("exit %d: %s", code, stderr)
		}
		unchanged(t, in, clean)
	})

	t.Run("batch into its input folder", func(t *testing.T) {
		in := t.TempDir()
		os.MkdirAll(filepath.Join(in, "ward"), 0o755)
		pdf := pdfOf(t, clean)
		os.WriteFile(filepath.Join(in, "ward", "scan.pdf"), pdf, 0o644)
		os.MkdirAll(filepath.Join(in, "sub"), 0o755)
		os.WriteFile(filepath.Join(in, "sub", "p1.png"), clean, 0o644)
		for _, out := range []string{in, filepath.Join(in, "sub")} {
			code, _, stderr := cli(t, 60*time.Second, "batch", in, "-o", out, "--format", "csv,json,pdf", "--quiet")
			noCrash(t, stderr)
			if code != 2 {
				t.Errorf("batch %s -o %s: exit %d, want 2: %s", in, out, code, stderr)
			}
		}
		unchanged(t, filepath.Join(in, "ward", "scan.pdf"), pdf)
		unchanged(t, filepath.Join(in, "sub", "p1.png"), clean)
		ents, _ := os.ReadDir(filepath.Join(in, "ward"))
		if len(ents) != 1 {
			t.Errorf("the refused batch wrote into the input folder: %v", ents)
		}
	})

	t.Run("a name with a space, WFDB chosen, then the same page again", func(t *testing.T) {
		dir := t.TempDir()
		in := filepath.Join(dir, "my scan.png")
		os.WriteFile(in, clean, 0o644)
		out := filepath.Join(dir, "out")
		for run := 1; run <= 2; run++ {
			code, _, stderr := cli(t, 120*time.Second, "digitize", in, "-o", out, "--format", "csv,wfdb,json")
			if code != 0 {
				t.Fatalf("run %d: exit %d: %s", run, code, stderr)
			}
		}
		for _, n := range []string{"my_scan.csv", "my_scan.hea", "my_scan.dat", "my_scan.json"} {
			if _, err := os.Stat(filepath.Join(out, n)); err != nil {
				t.Errorf("%s: %v", n, err)
			}
		}
	})
}

func TestMeasureProtectsAndRefuses(t *testing.T) {
	// Two CSV records of one stem: a 1 s sine-free strip is enough to be
	// refused or written; the outputs are what matters here.
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a"), filepath.Join(dir, "b")
	os.MkdirAll(a, 0o755)
	os.MkdirAll(b, 0o755)
	copyFile(t, "../../../shared/data/mitdb-100/100.hea", filepath.Join(a, "100.hea"))
	copyFile(t, "../../../shared/data/mitdb-100/100.dat", filepath.Join(a, "100.dat"))
	copyFile(t, "../../../shared/data/mitdb-100/100.hea", filepath.Join(b, "100.hea"))
	copyFile(t, "../../../shared/data/mitdb-100/100.dat", filepath.Join(b, "100.dat"))
	out := filepath.Join(dir, "out")
	code, _, stderr := cli(t, 60*time.Second, "measure", filepath.Join(a, "100.hea"), filepath.Join(b, "100.hea"), "-o", out, "-q")
	if code != 2 {
		t.Errorf("two records of one stem: exit %d, want 2: %s", code, stderr)
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("the usage error still made the output folder")
	}
	code, _, stderr = cli(t, 120*time.Second, "measure", filepath.Join(a, "100.hea"), "-o", out, "-q")
	if code != 0 {
		t.Fatalf("first record: exit %d: %s", code, stderr)
	}
	first, _ := os.ReadFile(filepath.Join(out, "100.json"))
	code, _, stderr = cli(t, 120*time.Second, "measure", filepath.Join(b, "100.hea"), "-o", out, "-q")
	if code != 1 || !strings.Contains(stderr, "written for") {
		t.Errorf("second record of the same stem: exit %d: %s", code, stderr)
	}
	unchanged(t, filepath.Join(out, "100.json"), first)

	// A time step of 1e-300 s: a message, not a panic.
	csv := filepath.Join(dir, "tiny.csv")
	os.WriteFile(csv, []byte("time_s,II\n0,0.1\n1e-300,0.2\n2e-300,0.1\n3e-300,0\n"), 0o644)
	code, _, stderr = cli(t, 30*time.Second, "measure", csv, "-o", out)
	noCrash(t, stderr)
	if code != 1 || !strings.Contains(stderr, "check the time column") {
		t.Errorf("1e-300 s step: exit %d: %s", code, stderr)
	}
}

func TestSpecialFilesRefused(t *testing.T) {
	dir := t.TempDir()
	fifo := filepath.Join(dir, "pipe.png")
	if err := syscall.Mkfifo(fifo, 0o644); err != nil {
		t.Skip("no FIFOs here:", err)
	}
	fifoCSV := filepath.Join(dir, "pipe.csv")
	syscall.Mkfifo(fifoCSV, 0o644)
	zero := filepath.Join(dir, "zero.png")
	os.Symlink("/dev/zero", zero)
	out := filepath.Join(dir, "out")
	for _, args := range [][]string{
		{"digitize", fifo, "-o", out},
		{"digitize", "/dev/zero", "-o", out},
		{"digitize", zero, "-o", out},
		{"measure", fifoCSV, "-o", out},
	} {
		code, _, stderr := cli(t, 30*time.Second, args...)
		noCrash(t, stderr)
		if code != 1 || !strings.Contains(stderr, "not a regular file") {
			t.Errorf("%v: exit %d: %s", args, code, stderr)
		}
	}
}

// Option values no page can have are usage errors (exit 2) found before
// the image is read: the output folder is not even made.
func TestBadOptionValues(t *testing.T) {
	dir := t.TempDir()
	img := filepath.Join(dir, "a.png")
	os.WriteFile(img, demo(t, "hillcrest_clean_300dpi.png"), 0o644)
	out := filepath.Join(dir, "o")
	for _, args := range [][]string{
		{"digitize", img, "-o", out, "--dpi", "-300"},
		{"digitize", img, "-o", out, "--dpi", "NaN"},
		{"digitize", img, "-o", out, "--layout", "bogus"},
		{"digitize", img, "-o", out, "--order", "alphabetical"},
		{"digitize", img, "-o", out, "--gain", "0.001"},
		{"digitize", img, "-o", out, "--speed", "-25"},
		{"digitize", img, "-o", out, "--max-megapixels", "-1"},
		{"batch", dir, "-o", out, "--layout", "bogus"},
		{"batch", dir, "-o", out, "--shard", "1/2000000000"},
		{"bench", "--conditions", "bogus"},
		{"bench", "--cases", "-5"},
		{"bench", "--truth-calib", "--outside", dir},
		{"bench", "--calib-table", "--truth-calib"},
		{"bench", "--calib-table", "--outside", dir},
	} {
		code, _, stderr := cli(t, 30*time.Second, args...)
		noCrash(t, stderr)
		if code != 2 {
			t.Errorf("%v: exit %d, want 2: %s", args, code, stderr)
		}
		if _, err := os.Stat(out); err == nil {
			t.Errorf("%v: made the output folder before refusing", args)
			os.RemoveAll(out)
		}
	}
}
