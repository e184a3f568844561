//go:build unix

package batch

import (
	"context"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"
)

// TestPoolWorker is a page worker when run by the pool tests: it serves
// the fake process, which misbehaves on request (see workerProc).
func TestPoolWorker(t *testing.T) {
	if os.Getenv("BATCH_POOL_WORKER") == "" {
		t.Skip("run by the pool tests")
	}
	var fk fake
	err := Serve(context.Background(), os.Stdin, os.Stdout, func(ctx context.Context, in string, page int, dir, stem string) (FileResult, error) {
		b, _ := os.ReadFile(in)
		switch strings.TrimSpace(string(b)) {
		case "killed":
			syscall.Kill(os.Getpid(), syscall.SIGKILL) // as the kernel's out-of-memory killer would
		case "gopanic":
			go panic("index out of range [7] with length 3")
			time.Sleep(time.Minute)
		case "hang":
			time.Sleep(time.Minute) // an OpenCV call that never returns ignores ctx too
		case "stray":
			os.Stdout.WriteString("not an answer\n")
		}
		return fk.process(ctx, in, page, dir, stem)
	})
	if err != nil {
		os.Exit(3)
	}
	os.Exit(0)
}

type spawns struct {
	mu   sync.Mutex
	cmds []*exec.Cmd
}

func (s *spawns) cmd(t *testing.T) func() *exec.Cmd {
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	return func() *exec.Cmd {
		c := exec.Command(exe, "-test.run=^TestPoolWorker$", "-test.count=1")
		c.Env = append(os.Environ(), "BATCH_POOL_WORKER=1")
		s.mu.Lock()
		s.cmds = append(s.cmds, c)
		s.mu.Unlock()
		return c
	}
}

func (s *spawns) n() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return len(s.cmds)
}

func TestPoolServesAndRecycles(t *testing.T) {
	t.Parallel()
	src, out := t.TempDir(), t.TempDir()
	writeTree(t, src, map[string]string{"a.png": "hr=60", "b.png": "hr=61", "c.png": "hr=62", "d.png": "hr=63",
		"e.png": "hr=64", "f.png": "hr=65", "g.png": "fail"})
	ins, _ := Collect(src, CollectOptions{})
	var sp spawns
	pool := NewPool(2, 2, sp.cmd(t))
	rep, err := Run(context.Background(), ins, pool.Process, Options{Out: out, Jobs: 2})
	pool.Close()
	if err != nil {
		t.Fatal(err)
	}
	if rep.OK != 6 || rep.Failed != 1 {
		t.Fatalf("ok %d failed %d", rep.OK, rep.Failed)
	}
	for _, r := range rep.Results {
		if r.Status == StatusOK && (r.Findings == nil || r.PeakRSSMB <= 0) {
			t.Errorf("%s: findings %v, worker peak %v MB", r.File, r.Findings, r.PeakRSSMB)
		}
		if r.File == "g.png" && !strings.Contains(r.Error, "no ECG grid found") {
			t.Errorf("a page's own error is not passed on: %q", r.Error)
		}
	}
	// 7 pages, each worker retired after 2: at least 4 workers, and one
	// failing page does not cost a worker.
	if n := sp.n(); n != 4 {
		t.Errorf("%d workers started for 7 pages at 2 per worker, want 4", n)
	}
	for _, c := range sp.cmds {
		if c.ProcessState == nil {
			t.Errorf("worker %d still running after Close", c.Process.Pid)
		}
	}
}

func TestPoolSurvivesBadWorkers(t *testing.T) {
	t.Parallel()
	src := t.TempDir()
	writeTree(t, src, map[string]string{"killed.png": "killed", "gopanic.png": "gopanic", "hang.png": "hang",
		"stray.png": "stray", "good.png": "hr=70"})
	var sp spawns
	pool := NewPool(1, 0, sp.cmd(t))
	defer pool.Close()
	call := func(name string, limit time.Duration) (time.Duration, error) {
		ctx, cancel := context.WithTimeout(context.Background(), limit)
		defer cancel()
		t0 := time.Now()
		_, err := pool.Process(ctx, filepath.Join(src, name), 0, t.TempDir(), "x")
		return time.Since(t0), err
	}
	for _, c := range []struct {
		file string
		want []string
		not  string
	}{
		{"killed.png", []string{"killed.png", "crashed", "signal: killed", "report"}, ""},
		{"gopanic.png", []string{"gopanic.png", "crashed", "index out of range [7]"}, "goroutine"},
		{"stray.png", []string{"stray.png", "does not parse"}, ""},
	} {
		_, err := call(c.file, 30*time.Second)
		if err == nil {
			t.Errorf("%s: no error", c.file)
			continue
		}
		for _, w := range c.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s: error %q lacks %q", c.file, err, w)
			}
		}
		if c.not != "" && strings.Contains(err.Error(), c.not) {
			t.Errorf("%s: error %q holds %q", c.file, err, c.not)
		}
		// The next page gets a fresh worker and succeeds.
		if _, err := call("good.png", 30*time.Second); err != nil {
			t.Errorf("after %s: %v", c.file, err)
		}
	}
	d, err := call("hang.png", 300*time.Millisecond)
	if !errors.Is(err, context.DeadlineExceeded) {
		t.Errorf("hung page: %v", err)
	}
	// Killed at once: no waiting for the worker's pipes (WaitDelay 2 s).
	if d > 1500*time.Millisecond {
		t.Errorf("the hung worker took %v to stop", d)
	}
	if _, err := call("good.png", 30*time.Second); err != nil {
		t.Errorf("after the hung page: %v", err)
	}
}
