package batch

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os/exec"
	"strings"
	"sync"
	"time"
)

// A Pool runs pages in worker processes that it starts and keeps: each
// worker serves one page at a time over its standard input and output
// (Serve), so the cost of starting a process (about 0.3 s for a program
// linked with OpenCV) is paid once per worker, not per page, while a page
// past its deadline can still be stopped by killing its worker, and a crash
// in C code takes down that worker only. A killed or crashed worker is
// replaced by a new one for the next page; a worker is also retired after
// Recycle pages, which bounds any memory a long run might leak.
type Pool struct {
	cmd     func() *exec.Cmd
	recycle int
	free    chan *poolWorker // nil entries: slots with no running worker
	mu      sync.Mutex
	live    map[*poolWorker]bool
}

// NewPool makes a pool of size workers; cmd returns the command that starts
// one (a program calling Serve). Workers start on first use. recycle ≤ 0
// means 100 pages.
func NewPool(size, recycle int, cmd func() *exec.Cmd) *Pool {
	if size < 1 {
		size = 1
	}
	if recycle <= 0 {
		recycle = 100
	}
	p := &Pool{cmd: cmd, recycle: recycle, free: make(chan *poolWorker, size), live: map[*poolWorker]bool{}}
	for i := 0; i < size; i++ {
		p.free <- nil
	}
	return p
}

type request struct {
	In   string `json:"in"`
	Page int    `json:"page,omitempty"`
	Dir  string `json:"dir"`
	Stem string `json:"stem"`
}

type response struct {
	Result FileResult `json:"result"`
	Error  string     `json:"error,omitempty"`
}

// Process is the pool's ProcessFunc.
func (p *Pool) Process(ctx context.Context, in string, page int, dir, stem string) (FileResult, error) {
	var w *poolWorker
	select {
	case w = <-p.free:
	case <-ctx.Done():
		return FileResult{}, ctx.Err()
	}
	defer func() { p.free <- w }()
	if w == nil {
		var err error
		if w, err = p.spawn(); err != nil {
			return FileResult{}, fmt.Errorf("batch: cannot start a page worker: %w", err)
		}
	}
	fr, alive, err := w.do(ctx, request{In: in, Page: page, Dir: dir, Stem: stem})
	if !alive {
		p.forget(w)
		w = nil
	} else if w.pages >= p.recycle {
		w.stop()
		p.forget(w)
		w = nil
	}
	return fr, err
}

// Close stops every worker (the ones serving a page are killed).
func (p *Pool) Close() {
	p.mu.Lock()
	ws := make([]*poolWorker, 0, len(p.live))
	for w := range p.live {
		ws = append(ws, w)
	}
	p.live = map[*poolWorker]bool{}
	p.mu.Unlock()
	for _, w := range ws {
		w.stop()
	}
}

func (p *Pool) forget(w *poolWorker) {
	p.mu.Lock()
	delete(p.live, w)
	p.mu.Unlock()
}

func (p *Pool) spawn() (*poolWorker, error) {
	cmd := p.cmd()
	setGroup(cmd)
	cmd.WaitDelay = 2 * time.Second
	w := &poolWorker{cmd: cmd, errs: &headBuffer{max: 16 << 10}, done: make(chan struct{})}
	cmd.Stderr = w.errs
	stdin, err := cmd.StdinPipe()
	if err != nil {
		return nil, err
	}
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		return nil, err
	}
	if err := cmd.Start(); err != nil {
		return nil, err
	}
	w.stdin, w.out = stdin, bufio.NewReaderSize(stdout, 64<<10)
	p.mu.Lock()
	p.live[w] = true
	p.mu.Unlock()
	return w, nil
}

type poolWorker struct {
	cmd     *exec.Cmd
	stdin   io.WriteCloser
	out     *bufio.Reader
	errs    *headBuffer
	pages   int
	once    sync.Once
	done    chan struct{}
	waitErr error
}

type line struct {
	b   []byte
	err error
}

// do serves one page; alive is false when the worker had to be killed or
// died, in which case it has been waited for.
func (w *poolWorker) do(ctx context.Context, q request) (FileResult, bool, error) {
	w.errs.Reset()
	b, _ := json.Marshal(q)
	if _, err := w.stdin.Write(append(b, '\n')); err != nil {
		w.kill()
		return FileResult{}, false, w.crashed(q.In)
	}
	ch := make(chan line, 1)
	go func() {
		b, err := w.out.ReadBytes('\n')
		ch <- line{b, err}
	}()
	select {
	case l := <-ch:
		if l.err != nil {
			w.kill()
			return FileResult{}, false, w.crashed(q.In)
		}
		var r response
		if err := json.Unmarshal(l.b, &r); err != nil {
			w.kill()
			return FileResult{}, false, fmt.Errorf("batch: %s: the page worker's answer does not parse (%v); this is a bug, please report it", q.In, err)
		}
		w.pages++
		if r.Error != "" {
			return r.Result, true, errors.New(r.Error)
		}
		return r.Result, true, nil
	case <-ctx.Done():
		w.kill()
		return FileResult{}, false, ctx.Err()
	}
}

// crashed describes a worker that died on a page.
func (w *poolWorker) crashed(in string) error {
	w.wait()
	return fmt.Errorf("batch: %s: digitizing it crashed (%v); this is a bug, please report it with the file%s", in, w.waitErr, CrashNote(w.errs.String()))
}

func (w *poolWorker) kill() {
	if w.cmd.Process != nil {
		killGroup(w.cmd)
	}
	w.wait()
}

func (w *poolWorker) wait() {
	w.once.Do(func() {
		w.waitErr = w.cmd.Wait()
		close(w.done)
	})
}

// stop ends a worker between pages: end of input, then a kill if it does
// not leave within 5 s.
func (w *poolWorker) stop() {
	w.stdin.Close()
	go w.wait()
	select {
	case <-w.done:
	case <-time.After(5 * time.Second):
		w.kill()
	}
}

// Serve is the worker side of a Pool: it reads one request per line from r,
// digitizes the page with proc and writes one answer per line to w, until r
// ends. Nothing else may write to w.
func Serve(ctx context.Context, r io.Reader, w io.Writer, proc ProcessFunc) error {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 64<<10), 1<<20)
	enc := json.NewEncoder(w)
	_, cpu0 := SelfUsage()
	for sc.Scan() {
		var q request
		if err := json.Unmarshal(sc.Bytes(), &q); err != nil {
			return fmt.Errorf("batch: bad request to the page worker: %w", err)
		}
		fr, err := proc(ctx, q.In, q.Page, q.Dir, q.Stem)
		var resp response
		resp.Result = fr
		if err != nil {
			resp.Error = err.Error()
		}
		peak, cpu := SelfUsage()
		resp.Result.PeakRSSMB, resp.Result.CPUSecond = peak, cpu-cpu0
		cpu0 = cpu
		if err := enc.Encode(resp); err != nil {
			return err
		}
	}
	return sc.Err()
}

// CrashNote quotes the first line of a runtime crash report (panic, fatal
// error, signal) found in a worker's error output, not the stack dump.
func CrashNote(s string) string {
	for _, l := range strings.Split(s, "\n") {
		l = strings.TrimSpace(l)
		if strings.HasPrefix(l, "panic:") || strings.HasPrefix(l, "fatal error:") || strings.HasPrefix(l, "SIG") {
			if len(l) > 200 {
				l = l[:200] + "…"
			}
			return "; it said: " + strings.TrimPrefix(l, "panic: ")
		}
	}
	return ""
}

// headBuffer keeps the first max bytes written to it since the last Reset:
// a crashing worker puts its reason before the stacks.
type headBuffer struct {
	mu  sync.Mutex
	max int
	b   []byte
}

func (h *headBuffer) Write(p []byte) (int, error) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if room := h.max - len(h.b); room > 0 {
		h.b = append(h.b, p[:min(room, len(p))]...)
	}
	return len(p), nil
}

func (h *headBuffer) Reset() {
	h.mu.Lock()
	h.b = h.b[:0]
	h.mu.Unlock()
}

func (h *headBuffer) String() string {
	h.mu.Lock()
	defer h.mu.Unlock()
	return string(h.b)
}
