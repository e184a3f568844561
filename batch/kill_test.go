package batch

import (
	"tracelift/record/ledger"

	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync/atomic"
	"syscall"
	"testing"
	"time"
)

// slowWriter is a ProcessFunc that writes a large CSV slowly, then the JSON
// document, so a kill lands in the middle of a page's outputs.
func slowWriter(calls *atomic.Int64) ProcessFunc {
	return func(ctx context.Context, in string, page int, dir, stem string) (FileResult, error) {
		calls.Add(1)
		b, err := os.ReadFile(in)
		if err != nil {
			return FileResult{}, err
		}
		f, err := os.Create(filepath.Join(dir, stem+".csv"))
		if err != nil {
			return FileResult{}, err
		}
		row := bytes.Repeat([]byte("0.001,"), 100)
		for i := 0; i < 200; i++ {
			f.Write(row)
			f.Write([]byte("\n"))
			if i%50 == 0 {
				time.Sleep(5 * time.Millisecond)
			}
		}
		f.Write([]byte("end\n"))
		if err := f.Close(); err != nil {
			return FileResult{}, err
		}
		sum := sha256.Sum256(b)
		doc, _ := json.Marshal(map[string]any{"image_sha256": hex.EncodeToString(sum[:]), "heart_rate_bpm": 60})
		if err := os.WriteFile(filepath.Join(dir, stem+".json"), doc, 0o644); err != nil {
			return FileResult{}, err
		}
		_, fd, err := ParseDocument(doc)
		return FileResult{Findings: fd}, err
	}
}

// TestKillChild is run by TestKilledBatchLeavesWholeFiles in a child process.
func TestKillChild(t *testing.T) {
	src, out := os.Getenv("BATCH_KILL_SRC"), os.Getenv("BATCH_KILL_OUT")
	if src == "" {
		t.Skip("run by TestKilledBatchLeavesWholeFiles")
	}
	ins, err := Collect(src, CollectOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var calls atomic.Int64
	Run(context.Background(), ins, slowWriter(&calls), Options{Out: out, Jobs: 2, Expect: []string{"csv"}})
}

// TestKilledBatchLeavesWholeFiles kills a batch with SIGKILL in the middle
// of its work: every output in OUT must be whole (the CSV ends with its
// last line, the JSON parses and names the input's hash), and running the
// batch again digitizes exactly the files that were not finished.
func TestKilledBatchLeavesWholeFiles(t *testing.T) {
	if os.Getenv("BATCH_KILL_SRC") != "" {
		t.Skip("inside a child")
	}
	src, out := t.TempDir(), t.TempDir()
	files := map[string]string{}
	const n = 60
	for i := 0; i < n; i++ {
		files[fmt.Sprintf("d%d/p%02d.png", i%3, i)] = fmt.Sprintf("page %d", i)
	}
	writeTree(t, src, files)
	exe, _ := os.Executable()
	cmd := exec.Command(exe, "-test.run=^TestKillChild$", "-test.count=1")
	cmd.Env = append(os.Environ(), "BATCH_KILL_SRC="+src, "BATCH_KILL_OUT="+out)
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	// Kill once a handful of pages are done and others are under way.
	deadline := time.Now().Add(20 * time.Second)
	for time.Now().Before(deadline) {
		b, _ := os.ReadFile(filepath.Join(out, LogName(0, 0)))
		if bytes.Count(b, []byte("\n")) >= 5 {
			break
		}
		time.Sleep(2 * time.Millisecond)
	}
	cmd.Process.Signal(syscall.SIGKILL)
	cmd.Wait()

	done := 0
	err := filepath.WalkDir(out, func(p string, d os.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() && strings.HasPrefix(d.Name(), ".tracelift-work-") {
			return filepath.SkipDir // scratch: never read, may hold partial files
		}
		if d.IsDir() || filepath.Dir(p) == out || d.Name() == ledger.Name {
			return nil
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		switch filepath.Ext(p) {
		case ".csv":
			if !bytes.HasSuffix(b, []byte("end\n")) {
				t.Errorf("%s is cut short (%d bytes)", p, len(b))
			}
		case ".json":
			if _, _, err := ParseDocument(b); err != nil {
				t.Errorf("%s: %v", p, err)
			}
			if _, err := os.Stat(strings.TrimSuffix(p, ".json") + ".csv"); err != nil {
				t.Errorf("%s has no CSV beside it", p)
			}
			done++
		default:
			t.Errorf("unexpected file %s", p)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if done == 0 || done == n {
		t.Logf("the kill came at %d of %d pages: the test did not hit the middle", done, n)
	}
	ins, _ := Collect(src, CollectOptions{})
	var calls atomic.Int64
	rep, err := Run(context.Background(), ins, slowWriter(&calls), Options{Out: out, Jobs: 2, Expect: []string{"csv"}})
	if err != nil {
		t.Fatal(err)
	}
	if rep.OK+rep.Skipped != n || rep.Skipped != done || int(calls.Load()) != n-done {
		t.Errorf("after the kill: %d done; rerun ok %d skipped %d, %d pages digitized", done, rep.OK, rep.Skipped, calls.Load())
	}
}
