package batch

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"tracelift/record/ledger"
)

// The folder cases of a batch that would let outputs replace inputs, or
// the batch read its own outputs, or skip inputs without a word.
func TestCheckFolders(t *testing.T) {
	in := t.TempDir()
	writeTree(t, in, map[string]string{"ward/scan.pdf": "", "sub/p1.png": ""})
	link := filepath.Join(t.TempDir(), "in-link")
	if err := os.Symlink(in, link); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name, src, out string
		ok             bool
	}{
		{"OUT is IN", in, in, false},
		{"OUT is IN through a link", link, in, false},
		{"OUT is IN with a trailing slash", in + "/", in, false},
		{"IN inside OUT", filepath.Join(in, "ward"), in, false},
		{"OUT inside IN, holding scans", in, filepath.Join(in, "sub"), false},
		{"OUT inside IN, new folder", in, filepath.Join(in, "out", "new"), true},
		{"OUT elsewhere", in, t.TempDir(), true},
	} {
		err := CheckFolders(c.src, c.out)
		if c.ok != (err == nil) {
			t.Errorf("%s: %v", c.name, err)
		}
		if err != nil && !errors.Is(err, ErrOverlap) {
			t.Errorf("%s: %v does not unwrap to ErrOverlap", c.name, err)
		}
	}
	// An output folder inside IN that holds only what tracelift wrote there
	// (a PDF summary) is the batch's own: accepted, and the walk skips it.
	out := filepath.Join(in, "results")
	os.MkdirAll(out, 0o755)
	if err := ledger.Claim(out, ledger.Source{Path: "/x/a.png"}, []string{"a.pdf"}, nil); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(out, "a.pdf"), []byte("%PDF"), 0o644)
	if err := CheckFolders(in, out); err != nil {
		t.Errorf("OUT inside IN with our outputs only: %v", err)
	}
	// The same folder with a user's scan put into it is refused.
	os.WriteFile(filepath.Join(out, "new-scan.png"), []byte("x"), 0o644)
	if err := CheckFolders(in, out); err == nil || !strings.Contains(err.Error(), "new-scan.png") {
		t.Errorf("OUT inside IN with a user's scan: %v", err)
	}
}

// A run whose outputs meet a file the user put in OUT (a WFDB record of
// the same name, a summary.csv) refuses that page and leaves the file as
// it was; the same page run again replaces its own outputs.
func TestRunNeverReplacesForeignFiles(t *testing.T) {
	src, out := t.TempDir(), t.TempDir()
	writeTree(t, src, map[string]string{"100.png": "hr=60", "b.png": "hr=60"})
	os.WriteFile(filepath.Join(out, "100.csv"), []byte("the user's own"), 0o644)
	ins, _ := Collect(src, CollectOptions{Out: out})
	var fk fake
	rep, err := Run(context.Background(), ins, fk.process, Options{Out: out, Jobs: 2})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range rep.Results {
		switch r.File {
		case "100.png":
			if r.Status != StatusFailed || !strings.Contains(r.Error, "not written by tracelift") {
				t.Errorf("100.png: %+v", r)
			}
		case "b.png":
			if r.Status != StatusOK {
				t.Errorf("b.png: %+v", r)
			}
		}
	}
	if b, _ := os.ReadFile(filepath.Join(out, "100.csv")); string(b) != "the user's own" {
		t.Errorf("the user's 100.csv was replaced: %q", b)
	}
	// Again without resume: b's outputs are its own and are replaced.
	rep, err = Run(context.Background(), ins, fk.process, Options{Out: out, Jobs: 1, NoResume: true})
	if err != nil || rep.OK != 1 {
		t.Errorf("second run: %v, %+v", err, rep)
	}
	// A user's summary.csv in OUT stops the batch before any page.
	out2 := t.TempDir()
	os.WriteFile(filepath.Join(out2, "summary.csv"), []byte("mine"), 0o644)
	if _, err := Run(context.Background(), ins, fk.process, Options{Out: out2}); err == nil {
		t.Error("a user's summary.csv in OUT was accepted")
	}
	if b, _ := os.ReadFile(filepath.Join(out2, "summary.csv")); string(b) != "mine" {
		t.Errorf("the user's summary.csv was replaced: %q", b)
	}
}

// Adding p12.jpg beside a finished p12.png: p12.png keeps its outputs'
// name (resume skips it), the newcomer gets its own.
func TestStemsStayWhenANameIsAdded(t *testing.T) {
	src, out := t.TempDir(), t.TempDir()
	writeTree(t, src, map[string]string{"p12.png": "hr=60"})
	var fk fake
	ins, _ := Collect(src, CollectOptions{Out: out})
	if _, err := Run(context.Background(), ins, fk.process, Options{Out: out}); err != nil {
		t.Fatal(err)
	}
	writeTree(t, src, map[string]string{"p12.jpg": "hr=70"})
	ins, _ = Collect(src, CollectOptions{Out: out})
	stems := map[string]string{}
	for _, in := range ins {
		stems[in.Rel] = in.Stem
	}
	if stems["p12.png"] != "p12" || stems["p12.jpg"] == "p12" || stems["p12.jpg"] == "" {
		t.Fatalf("stems: %v", stems)
	}
	rep, err := Run(context.Background(), ins, fk.process, Options{Out: out})
	if err != nil {
		t.Fatal(err)
	}
	if rep.Skipped != 1 || rep.OK != 1 {
		t.Errorf("want p12.png skipped and p12.jpg done: %+v", rep.Results)
	}
	// Without the ledger's knowledge (no OUT given), both get new names as
	// before; that is what Collect without Out does.
	ins, _ = Collect(src, CollectOptions{})
	for _, in := range ins {
		if in.Stem == "p12" {
			t.Errorf("without OUT, %s kept the bare stem", in.Rel)
		}
	}
}

// A FIFO or a link to a device named like an image is reported as failed,
// not skipped and not read (a FIFO would block the batch for ever).
func TestSpecialFilesReported(t *testing.T) {
	src, out := t.TempDir(), t.TempDir()
	writeTree(t, src, map[string]string{"ok.png": "hr=60"})
	if err := syscall.Mkfifo(filepath.Join(src, "pipe.png"), 0o644); err != nil {
		t.Skip("no FIFOs here:", err)
	}
	if err := os.Symlink("/dev/zero", filepath.Join(src, "zero.png")); err != nil {
		t.Fatal(err)
	}
	ins, err := Collect(src, CollectOptions{})
	if err != nil {
		t.Fatal(err)
	}
	// A list naming them directly reaches the hashing step instead.
	list := filepath.Join(t.TempDir(), "list.txt")
	os.WriteFile(list, []byte(filepath.Join(src, "pipe.png")+"\n"+filepath.Join(src, "zero.png")+"\n"), 0o644)
	lins, err := Collect(list, CollectOptions{Base: src})
	if err != nil {
		t.Fatal(err)
	}
	var fk fake
	for _, set := range [][]Input{ins, lins} {
		done := make(chan *Report, 1)
		go func() {
			rep, _ := Run(context.Background(), set, fk.process, Options{Out: out, NoResume: true})
			done <- rep
		}()
		select {
		case rep := <-done:
			for _, r := range rep.Results {
				if r.File == "ok.png" {
					continue
				}
				if r.Status != StatusFailed || !strings.Contains(r.Error, "not a regular file") && !strings.Contains(r.Error, "not an image file saved on disk") {
					t.Errorf("%s: %+v", r.File, r)
				}
			}
			if len(rep.Results) != len(set) {
				t.Errorf("%d results for %d inputs", len(rep.Results), len(set))
			}
		case <-time.After(30 * time.Second):
			t.Fatal("the batch hung on a FIFO or a device")
		}
	}
}

// Scratch folders left by a killed batch are removed by the next run; the
// one of a batch still running (its lock held) stays.
func TestStaleWorkRemoved(t *testing.T) {
	src, out := t.TempDir(), t.TempDir()
	writeTree(t, src, map[string]string{"a.png": "hr=60"})
	dead := filepath.Join(out, workPrefix+"dead")
	live := filepath.Join(out, workPrefix+"live")
	for _, d := range []string{dead, live} {
		os.MkdirAll(filepath.Join(d, "page-1"), 0o755)
		os.WriteFile(filepath.Join(d, "page-1", "a.csv"), []byte("x"), 0o644)
	}
	os.WriteFile(filepath.Join(dead, ".lock"), nil, 0o600)
	release, err := lockWork(live)
	if err != nil {
		t.Fatal(err)
	}
	defer release()
	ins, _ := Collect(src, CollectOptions{})
	var fk fake
	if _, err := Run(context.Background(), ins, fk.process, Options{Out: out}); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(dead); !os.IsNotExist(err) {
		t.Errorf("the dead batch's scratch folder is still there: %v", err)
	}
	if _, err := os.Stat(live); err != nil {
		t.Errorf("the running batch's scratch folder was removed: %v", err)
	}
}

// A summary named for two thousand million shards is refused at once
// instead of listing every missing shard.
func TestMergeRefusesAbsurdShardCounts(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"summary-1-of-2000000000.csv", "summary-0-of-3.csv", "summary-99999999999999999999-of-3.csv"} {
		p := filepath.Join(dir, name)
		if err := WriteSummaryFile(p, nil); err != nil {
			t.Fatal(err)
		}
		if _, err := Merge([]string{p}, nil); err == nil || !strings.Contains(err.Error(), "shards") {
			t.Errorf("%s: %v", name, err)
		}
	}
	if _, _, err := ParseShard("1/2000000000"); err == nil {
		t.Error("--shard 1/2000000000 accepted")
	}
}
