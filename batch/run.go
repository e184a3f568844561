package batch

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"sync"
	"time"

	"tracelift/record/ledger"
)

// Status of one file in a batch.
type Status string

// The statuses.
const (
	StatusOK      Status = "ok"      // digitized in this run
	StatusSkipped Status = "skipped" // outputs already there and match the input
	StatusFailed  Status = "failed"
	// StatusNoECG: a page of a document that holds no ECG (a cover
	// sheet); nothing is written for it.
	StatusNoECG Status = "no_ecg"
)

// FileResult is what a ProcessFunc reports for a page it digitized.
type FileResult struct {
	SHA256    string // of the image bytes as read; compared with the batch's own hash when set
	Findings  Findings
	TimingsMS map[string]float64
	PeakRSSMB float64 // peak resident memory of the worker process, when known
	CPUSecond float64 // processor time of the worker process (user + system), when known
	// Page is the page digitized, from 1, for a file of several pages; 0
	// otherwise. The output folder's ledger records it with the file.
	Page int `json:",omitempty"`
	// NoECG, when set, says why the page holds no ECG (a cover sheet of
	// a document); nothing was written and the page is not failed.
	NoECG string `json:",omitempty"`
}

// ProcessFunc digitizes the image at in (page page of it, from 1, for a
// document of several pages; 0 for a single picture) and writes its outputs into dir
// (a fresh, empty scratch folder) as <stem>.<ext>. It must write the JSON
// document <stem>.json. A returned error fails this file only; its text
// should name the file and say what to do. ctx carries the page deadline.
type ProcessFunc func(ctx context.Context, in string, page int, dir, stem string) (FileResult, error)

// Options for Run. The zero value of each field is a documented default.
type Options struct {
	Out string // output folder (required); created when missing
	// Jobs is the number of pages digitized at once; 0 = GOMAXPROCS (the
	// CPUs this process may use, container limits included).
	Jobs int
	// ShardK of ShardN name the log and summary files (summary-K-of-N.csv);
	// the caller does the split with Shard. 0 or 1 for N: not sharded.
	ShardK, ShardN int
	// PageTimeout bounds one page; 0 = DefaultPageTimeout, < 0 = no bound.
	// When it passes, ctx given to the ProcessFunc is cancelled; a process
	// that has not returned Grace later is abandoned and the file failed.
	PageTimeout time.Duration
	Grace       time.Duration // 0 = 5 s
	// Expect lists the output extensions (without dot) a page must have to
	// count as done, e.g. csv, hea, dat. "json" is always expected.
	Expect []string
	// NoResume digitizes every file even when its outputs are up to date.
	NoResume bool
	// MaxBytes bounds the size of an input file; 0 = 200 MB (calib's
	// default).
	MaxBytes int64
	// OnResult is called once per file, in completion order, from a single
	// goroutine (progress display).
	OnResult func(done, total int, r Result)
}

// DefaultPageTimeout bounds one page unless Options says otherwise. A 300
// dpi A4 page takes seconds; two minutes leaves room for a slow machine.
const DefaultPageTimeout = 120 * time.Second

// Result is the outcome of one file: a line of the log.
type Result struct {
	Time      string             `json:"time"`
	File      string             `json:"file"` // Input.Name()
	Path      string             `json:"path"`
	Status    Status             `json:"status"`
	Error     string             `json:"error,omitempty"`
	SHA256    string             `json:"image_sha256,omitempty"`
	Outputs   []string           `json:"outputs,omitempty"`
	Seconds   float64            `json:"seconds"`
	TimingsMS map[string]float64 `json:"timings_ms,omitempty"`
	Findings  *Findings          `json:"findings,omitempty"`
	PeakRSSMB float64            `json:"peak_rss_mb,omitempty"`
	CPUSecond float64            `json:"cpu_s,omitempty"`
	Worker    int                `json:"worker"`
	Page      int                `json:"page,omitempty"` // of a document, from 1
	rel       string             // Input.Rel: the document a page belongs to
}

// Row returns the summary line of r.
func (r Result) Row() Row {
	f := NoFindings()
	if r.Findings != nil {
		f = *r.Findings
	}
	e := r.Error
	if e == "" && f.MeasureError != "" {
		// Traced but not measured: the signals are there, the findings not.
		e = "not measured: " + f.MeasureError
	}
	return Row{File: r.File, Status: r.Status, Error: e, Findings: f, Seconds: r.Seconds}
}

// Report is the outcome of a batch.
type Report struct {
	Results             []Result // one per input handled, sorted by File
	OK, Skipped, Failed int
	// NoECG counts the pages of documents passed over as holding no ECG.
	NoECG       int
	LogPath     string
	SummaryPath string
	// Interrupted is set when ctx was cancelled before every input was
	// handled; the summary then holds the files handled so far.
	Interrupted bool
}

// Failures returns the failed results.
func (r *Report) Failures() []Result {
	var out []Result
	for _, x := range r.Results {
		if x.Status == StatusFailed {
			out = append(out, x)
		}
	}
	return out
}

// Run digitizes the inputs with proc on parallel workers, appends one JSON
// line per file to the log, and writes the summary CSV atomically at the
// end. A failing file never stops the batch. The error is non-nil only when
// the batch could not start (the output folder or the log cannot be made)
// or ctx was cancelled; the report is valid in the second case.
func Run(ctx context.Context, ins []Input, proc ProcessFunc, opt Options) (*Report, error) {
	if proc == nil {
		return nil, errors.New("batch: no process function")
	}
	if opt.Out == "" {
		return nil, errors.New("batch: no output folder given")
	}
	if err := os.MkdirAll(opt.Out, 0o755); err != nil {
		return nil, fmt.Errorf("batch: %w", err)
	}
	root, err := filepath.Abs(opt.Out)
	if err == nil {
		root, err = filepath.EvalSymlinks(root)
	}
	if err != nil {
		return nil, fmt.Errorf("batch: %w", err)
	}
	jobs := opt.Jobs
	if jobs <= 0 {
		jobs = runtime.GOMAXPROCS(0)
	}
	timeout := opt.PageTimeout
	if timeout == 0 {
		timeout = DefaultPageTimeout
	}
	grace := opt.Grace
	if grace <= 0 {
		grace = 5 * time.Second
	}
	rep := &Report{
		LogPath:     filepath.Join(root, LogName(opt.ShardK, opt.ShardN)),
		SummaryPath: filepath.Join(root, SummaryName(opt.ShardK, opt.ShardN)),
	}
	if err := refuseLink(rep.LogPath); err != nil {
		return nil, err
	}
	// The log and the summary replace or extend only a batch's own.
	if err := ledger.Claim(root, ledger.Source{Path: "a batch run"}, []string{filepath.Base(rep.LogPath), filepath.Base(rep.SummaryPath)}, nil); err != nil {
		return nil, fmt.Errorf("batch: %w", err)
	}
	logf, err := os.OpenFile(rep.LogPath, os.O_RDWR|os.O_APPEND|os.O_CREATE, 0o644)
	if err != nil {
		return nil, fmt.Errorf("batch: opening the log: %w", err)
	}
	defer logf.Close()
	if err := endLine(logf); err != nil {
		return nil, fmt.Errorf("batch: the log: %w", err)
	}
	removeStaleWork(root)
	work, err := os.MkdirTemp(root, workPrefix)
	if err != nil {
		return nil, fmt.Errorf("batch: %w", err)
	}
	defer os.RemoveAll(work)
	release, err := lockWork(work)
	if err != nil {
		return nil, fmt.Errorf("batch: locking the scratch folder: %w", err)
	}
	defer release()

	maxBytes := opt.MaxBytes
	if maxBytes <= 0 {
		maxBytes = 200 << 20
	}
	w := &worker{root: root, work: work, proc: proc, timeout: timeout, grace: grace, maxBytes: maxBytes,
		expect: expected(opt.Expect), resume: !opt.NoResume}
	todo := make(chan Input)
	done := make(chan Result)
	var wg sync.WaitGroup
	for i := 0; i < jobs; i++ {
		wg.Add(1)
		go func(id int) {
			defer wg.Done()
			for in := range todo {
				r := w.one(ctx, in)
				r.Worker = id
				done <- r
			}
		}(i + 1)
	}
	go func() {
		defer close(todo)
		for _, in := range ins {
			select {
			case todo <- in:
			case <-ctx.Done():
				return
			}
		}
	}()
	go func() {
		wg.Wait()
		close(done)
	}()

	// The single writer: log lines, progress, tally.
	enc := json.NewEncoder(logf)
	var logErr error
	for r := range done {
		if err := enc.Encode(r); err != nil && logErr == nil {
			logErr = fmt.Errorf("batch: writing the log: %w", err)
		}
		rep.Results = append(rep.Results, r)
		switch r.Status {
		case StatusOK:
			rep.OK++
		case StatusSkipped:
			rep.Skipped++
		case StatusNoECG:
			rep.NoECG++
		default:
			rep.Failed++
		}
		if opt.OnResult != nil {
			opt.OnResult(len(rep.Results), len(ins), r)
		}
	}
	if err := logf.Sync(); err != nil && logErr == nil {
		logErr = fmt.Errorf("batch: writing the log: %w", err)
	}
	if ctx.Err() == nil {
		failEmptyDocuments(rep, ins)
	}
	sort.Slice(rep.Results, func(a, b int) bool { return rep.Results[a].File < rep.Results[b].File })
	rows := make([]Row, len(rep.Results))
	for i, r := range rep.Results {
		rows[i] = r.Row()
	}
	if err := WriteSummaryFile(rep.SummaryPath, rows); err != nil {
		return rep, fmt.Errorf("batch: writing the summary: %w", err)
	}
	if ctx.Err() != nil && len(rep.Results) < len(ins) {
		rep.Interrupted = true
		return rep, fmt.Errorf("batch: interrupted after %d of %d files (%w); run the same command again to go on: finished files are kept", len(rep.Results), len(ins), ctx.Err())
	}
	return rep, logErr
}

// failEmptyDocuments fails the first page of each document none of whose
// pages holds an ECG: a document of cover sheets only is no success.
func failEmptyDocuments(rep *Report, ins []Input) {
	pages := map[string]int{}
	for _, in := range ins {
		if in.Page > 0 {
			pages[in.Rel]++
		}
	}
	none := map[string]int{}
	first := map[string]int{}
	for i, r := range rep.Results {
		if r.Page > 0 && r.Status == StatusNoECG {
			none[r.rel]++
			if j, ok := first[r.rel]; !ok || rep.Results[j].Page > r.Page {
				first[r.rel] = i
			}
		}
	}
	for rel, n := range none {
		if n != pages[rel] {
			continue
		}
		r := &rep.Results[first[rel]]
		r.Error = fmt.Sprintf("batch: none of the %d pages of %s holds an ECG (page %d: %s); check that this is the right document", n, r.Path, r.Page, r.Error)
		r.Status = StatusFailed
		rep.NoECG--
		rep.Failed++
	}
}

func expected(exts []string) []string {
	out := []string{}
	seen := map[string]bool{"json": true}
	for _, e := range exts {
		e = strings.TrimPrefix(strings.ToLower(e), ".")
		if e != "" && !seen[e] {
			seen[e] = true
			out = append(out, e)
		}
	}
	return append(out, "json")
}

type worker struct {
	root, work     string
	proc           ProcessFunc
	timeout, grace time.Duration
	maxBytes       int64
	expect         []string
	resume         bool
}

// one handles one input; it never panics and always returns a result.
func (w *worker) one(ctx context.Context, in Input) (r Result) {
	t0 := time.Now()
	r = Result{File: in.Name(), Path: in.Path, Status: StatusFailed, Page: in.Page, rel: in.Rel}
	defer func() {
		r.Seconds = time.Since(t0).Seconds()
		r.Time = time.Now().UTC().Format(time.RFC3339)
	}()
	if in.Err != "" {
		r.Error = in.Err
		return r
	}
	if err := ctx.Err(); err != nil {
		r.Error = "batch: interrupted before " + in.Path + " was digitized; run the batch again to finish it"
		return r
	}
	dir, err := outDir(w.root, in.Rel)
	if err != nil {
		r.Error = err.Error()
		return r
	}
	// The hash is part of the page's work: under its deadline, stopped by
	// an interrupt.
	hctx, hcancel := ctx, context.CancelFunc(func() {})
	if w.timeout > 0 {
		hctx, hcancel = context.WithTimeout(ctx, w.timeout)
	}
	sha, err := hashFile(hctx, in.Path, w.maxBytes)
	hcancel()
	if err != nil {
		r.Error = err.Error()
		return r
	}
	r.SHA256 = sha
	stem := in.Stem
	if stem == "" {
		stem = plainStem(in.Rel)
	}
	if w.resume {
		if f, outs, ok := w.upToDate(dir, stem, sha); ok {
			r.Status, r.Findings, r.Outputs = StatusSkipped, &f, outs
			return r
		}
	}
	scratch, err := os.MkdirTemp(w.work, "page-")
	if err != nil {
		r.Error = "batch: " + err.Error()
		return r
	}
	fr, abandoned, err := w.call(ctx, in.Path, in.Page, scratch, stem)
	if !abandoned {
		defer os.RemoveAll(scratch)
	}
	r.TimingsMS, r.PeakRSSMB, r.CPUSecond = fr.TimingsMS, fr.PeakRSSMB, fr.CPUSecond
	if err != nil && ctx.Err() != nil {
		r.Error = "batch: interrupted before " + in.Path + " was finished; run the batch again to finish it"
		return r
	}
	if err != nil {
		r.Error = err.Error()
		return r
	}
	if fr.NoECG != "" {
		r.Status, r.Error = StatusNoECG, fr.NoECG
		return r
	}
	if fr.SHA256 != "" && fr.SHA256 != sha {
		r.Error = fmt.Sprintf("batch: %s changed while it was digitized; run the batch again", in.Path)
		return r
	}
	for _, e := range w.expect {
		if _, err := os.Stat(filepath.Join(scratch, stem+"."+e)); err != nil {
			r.Error = fmt.Sprintf("batch: digitizing %s wrote no %s.%s; this is a bug, please report it", in.Path, stem, e)
			return r
		}
	}
	outs, err := placeOutputs(scratch, dir, ledger.FileSource(in.Path, fr.Page), in.Path)
	r.Outputs = outs
	if err != nil {
		r.Error = err.Error()
		return r
	}
	f := fr.Findings
	r.Status, r.Findings = StatusOK, &f
	return r
}

// call runs the process function under the page deadline. A call that has
// not returned grace after the deadline is abandoned (its goroutine keeps
// running until the function returns; its scratch folder is left to the
// final clean-up).
func (w *worker) call(ctx context.Context, in string, page int, dir, stem string) (fr FileResult, abandoned bool, err error) {
	pctx, cancel := ctx, context.CancelFunc(func() {})
	if w.timeout > 0 {
		pctx, cancel = context.WithTimeout(ctx, w.timeout)
	}
	defer cancel()
	type out struct {
		fr  FileResult
		err error
	}
	ch := make(chan out, 1)
	go func() {
		defer func() {
			if p := recover(); p != nil {
				ch <- out{err: fmt.Errorf("batch: internal error while digitizing %s (%v); this is a bug, please report it with the file", in, p)}
			}
		}()
		fr, err := w.proc(pctx, in, page, dir, stem)
		ch <- out{fr, err}
	}()
	timedOut := func(e error) error {
		if errors.Is(pctx.Err(), context.DeadlineExceeded) && ctx.Err() == nil {
			return fmt.Errorf("batch: %s took longer than %v and was stopped; check the image or raise --page-timeout", in, w.timeout)
		}
		return e
	}
	select {
	case o := <-ch:
		if o.err != nil {
			return o.fr, false, timedOut(o.err)
		}
		return o.fr, false, nil
	case <-pctx.Done():
	}
	select {
	case o := <-ch:
		if o.err == nil {
			o.err = pctx.Err()
		}
		return o.fr, false, timedOut(o.err)
	case <-time.After(w.grace):
		err := timedOut(fmt.Errorf("batch: stopped while digitizing %s: %w", in, ctx.Err()))
		return FileResult{}, true, fmt.Errorf("%w (abandoned: the page did not stop within %v)", err, w.grace)
	}
}

// upToDate reports whether dir holds stem's outputs for the image with
// hash sha: the JSON document parses and names that hash, and every
// expected output exists as a regular file (no links).
func (w *worker) upToDate(dir, stem, sha string) (Findings, []string, bool) {
	var outs []string
	for _, e := range w.expect {
		p := filepath.Join(dir, stem+"."+e)
		fi, err := os.Lstat(p)
		if err != nil || !fi.Mode().IsRegular() {
			return Findings{}, nil, false
		}
		outs = append(outs, p)
	}
	b, err := os.ReadFile(filepath.Join(dir, stem+".json"))
	if err != nil {
		return Findings{}, nil, false
	}
	got, f, err := ParseDocument(b)
	if err != nil || !strings.EqualFold(got, sha) {
		return Findings{}, nil, false
	}
	return f, outs, true
}

// hashFile hashes the regular file at p (a link to one is followed), at
// most max bytes, checking ctx between blocks.
func hashFile(ctx context.Context, p string, max int64) (string, error) {
	fi, err := os.Stat(p)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return "", fmt.Errorf("batch: %s does not exist; check the path or the list", p)
		}
		return "", fmt.Errorf("batch: cannot read %s: %s; check its permissions", p, errText(err))
	}
	if fi.IsDir() {
		return "", fmt.Errorf("batch: %s is a folder, not an image file", p)
	}
	if !fi.Mode().IsRegular() {
		return "", fmt.Errorf("batch: %s is not a regular file (%v); list image files saved on disk", p, fi.Mode().Type())
	}
	if fi.Size() > max {
		return "", fmt.Errorf("batch: %s is %d bytes, over the %d byte limit; scan at a lower resolution or raise --max-megabytes", p, fi.Size(), max)
	}
	f, err := os.Open(p)
	if err != nil {
		return "", fmt.Errorf("batch: cannot read %s: %s; check its permissions", p, errText(err))
	}
	defer f.Close()
	if fi, err := f.Stat(); err != nil || !fi.Mode().IsRegular() {
		return "", fmt.Errorf("batch: %s is not a regular file; list image files saved on disk", p)
	}
	h := sha256.New()
	buf := make([]byte, 1<<20)
	var n int64
	for {
		if err := ctx.Err(); err != nil {
			return "", fmt.Errorf("batch: stopped while reading %s: %w", p, err)
		}
		k, err := f.Read(buf)
		h.Write(buf[:k])
		if n += int64(k); n > max {
			return "", fmt.Errorf("batch: %s grew over the %d byte limit while read; raise --max-megabytes or copy it first", p, max)
		}
		if err == io.EOF {
			break
		}
		if err != nil {
			return "", fmt.Errorf("batch: cannot read %s: %s", p, errText(err))
		}
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// endLine ends a log cut short by a killed run with a line break, so the
// next run's lines stay whole (the broken line is left for a reader to skip).
func endLine(f *os.File) error {
	fi, err := f.Stat()
	if err != nil || fi.Size() == 0 {
		return err
	}
	last := make([]byte, 1)
	if _, err := f.ReadAt(last, fi.Size()-1); err != nil {
		return err
	}
	if last[0] != '\n' {
		_, err = f.Write([]byte{'\n'})
	}
	return err
}

// workPrefix names a batch's scratch folders inside OUT.
const workPrefix = ".tracelift-work-"

// removeStaleWork removes the scratch folders that batches killed before
// their clean-up (kill -9, a power cut) left in root; those of batches
// still running (other shards on the same OUT) hold their lock and stay.
func removeStaleWork(root string) {
	ents, err := os.ReadDir(root)
	if err != nil {
		return
	}
	for _, e := range ents {
		if e.IsDir() && strings.HasPrefix(e.Name(), workPrefix) {
			if d := filepath.Join(root, e.Name()); staleWork(d) {
				os.RemoveAll(d)
			}
		}
	}
}

func timeSince(t time.Time) float64 { return time.Since(t).Seconds() }
