package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"io/fs"
	"os"
	"os/exec"
	"os/signal"
	"path/filepath"
	"regexp"
	"runtime"
	"strings"
	"syscall"
	"time"

	"github.com/schollz/progressbar/v3"

	"tracelift/axis"
	"tracelift/batch"
	"tracelift/calib"
	"tracelift/digitize"
	"tracelift/pipeline"
	"tracelift/record"
	"tracelift/report"
)

func init() {
	register("batch", "digitize every image of a folder tree or a list; parallel, resumable, shardable", cmdBatch)
}

// serveArg, as the first argument of batch, makes the process a page
// worker of a parent batch (see batch.Pool). It is not for people and is
// not listed.
const serveArg = "__serve"

// jobsPerCore caps --jobs at this many pages per usable CPU (pages wait on
// the disk or poppler a little, so a few more than one per core can help).
const jobsPerCore = 4

type batchFlags struct {
	common      commonFlags
	jobs        int
	shard       string
	pageTimeout time.Duration
	inProcess   bool
	noResume    bool
	base        string
	quiet       bool
}

func cmdBatch(args []string, stdout, stderr io.Writer) int {
	if len(args) > 0 && args[0] == serveArg {
		return cmdServe(args[1:], stdout, stderr)
	}
	fs := flag.NewFlagSet("batch", flag.ContinueOnError)
	var b batchFlags
	b.common.register(fs)
	// GOMAXPROCS, not NumCPU: since Go 1.25 it follows a container's CPU
	// limit (cgroup quota) as well as the CPU affinity a scheduler set.
	fs.IntVar(&b.jobs, "jobs", runtime.GOMAXPROCS(0), "pages digitized at once (default: the CPUs this process may use)")
	fs.StringVar(&b.shard, "shard", "", "do only shard K of N (K/N, 1-based): N processes with K = 1…N cover every file once")
	fs.DurationVar(&b.pageTimeout, "page-timeout", batch.DefaultPageTimeout, "give up a page after this long (0 = never)")
	fs.BoolVar(&b.inProcess, "in-process", false, "digitize in this process instead of in worker processes (a stuck page can then only be abandoned, not stopped)")
	fs.BoolVar(&b.noResume, "no-resume", false, "digitize every file again, even when its outputs are up to date")
	fs.StringVar(&b.base, "base", "", "folder that the paths of LIST.txt are relative to (default: the list's folder)")
	fs.BoolVar(&b.quiet, "quiet", false, "no progress display")
	fs.Usage = usageFunc(fs, stderr,
		"usage: tracelift-cli batch INPUT_DIR|LIST.txt -o OUT [options]",
		"Digitizes every PNG, JPEG, TIFF and PDF below INPUT_DIR (or each path of LIST.txt, one per line)",
		"into OUT, mirroring the folders. Always writes the JSON document (resume reads it), one JSON line",
		"per file in OUT/batch-log.jsonl and a table of findings in OUT/summary.csv (per shard:",
		"batch-log-K-of-N.jsonl, summary-K-of-N.csv; join them with 'tracelift-cli merge').",
		"Files whose outputs exist and whose JSON names the same image hash are skipped.",
		"Exit status: 0 every file done, 1 some files failed (listed), 2 usage error.",
	)
	pos, code, ok := parseCommand(fs, args, stderr)
	if !ok {
		return code
	}
	b.common.seen(fs)
	usageErr := func(msg string) int { return usageError(stderr, "batch", msg) }
	if len(pos) != 1 {
		return usageErr("give one INPUT_DIR or LIST.txt")
	}
	if err := b.common.check(); err != nil {
		return usageErr(err.Error())
	}
	if b.jobs < 1 {
		return usageErr(fmt.Sprintf("--jobs %d: give at least 1", b.jobs))
	}
	// A page takes a core and a few hundred MB: more workers than a few per
	// core only share the cores and add memory.
	if most := jobsPerCore * runtime.GOMAXPROCS(0); b.jobs > most {
		fmt.Fprintf(stderr, "tracelift-cli batch: --jobs %d is more than %d per CPU this process may use; running %d at once\n", b.jobs, jobsPerCore, most)
		b.jobs = most
	}
	if b.pageTimeout < 0 {
		return usageErr("--page-timeout: give a duration such as 90s or 5m, or 0 for no limit")
	}
	k, n := 1, 1
	if b.shard != "" {
		var err error
		if k, n, err = batch.ParseShard(b.shard); err != nil {
			return usageErr(err.Error())
		}
	}
	formats, _ := pipeline.ParseFormats(b.common.formats)
	formats = jsonLast(formats)

	plain := false
	for _, f := range formats {
		plain = plain || f == pipeline.FormatWFDB // WFDB record names are plain
	}
	if err := batch.CheckFolders(pos[0], b.common.out); err != nil {
		return usageErr(err.Error())
	}
	all, err := batch.Collect(pos[0], batch.CollectOptions{Base: b.base, Skip: []string{b.common.out}, PlainStems: plain, Out: b.common.out})
	if err != nil {
		return usageErr(err.Error() + "; give a folder of images or a text file listing them")
	}
	ins := batch.Shard(all, k, n)
	if len(all) == 0 {
		fmt.Fprintf(stderr, "tracelift-cli batch: no PNG, JPEG, TIFF or PDF file found below %s\n", pos[0])
		return 1
	}
	files := len(ins)
	if !b.common.pageGiven {
		// Every page of a document becomes its own record (after the
		// split into shards: a document's pages share its shard).
		ins = batch.ExpandPages(ins, countPages(&b.common))
	}

	var proc batch.ProcessFunc
	if b.inProcess {
		proc = inProcess(&b.common, formats)
	} else {
		exe, err := os.Executable()
		if err != nil {
			fmt.Fprintln(stderr, "tracelift-cli batch: cannot find this program to start page workers:", err, "; use --in-process")
			return 1
		}
		args := append([]string{"batch", serveArg, "-format", strings.Join(formats, ",")}, passThrough(fs)...)
		pool := batch.NewPool(b.jobs, 0, func() *exec.Cmd { return exec.Command(exe, args...) })
		defer pool.Close()
		proc = pool.Process
	}

	timeout := b.pageTimeout
	if timeout == 0 {
		timeout = -1 // batch: < 0 means no bound
	}
	prog := newProgress(stderr, len(ins), b.quiet)
	opt := batch.Options{
		Out: b.common.out, Jobs: b.jobs, ShardK: k, ShardN: n, PageTimeout: timeout,
		Expect: extensions(formats), NoResume: b.noResume, OnResult: prog.result,
		MaxBytes: int64(b.common.maxMB * 1e6),
	}
	if n > 1 {
		fmt.Fprintf(stderr, "shard %d of %d: %d of %d files\n", k, n, files, len(all))
	}
	if len(ins) > files {
		fmt.Fprintf(stderr, "%d files hold %d pages: every page of a document is looked at, each ECG page becomes a record of its own (<stem>-p2 …)\n", files, len(ins))
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	rep, err := batch.Run(ctx, ins, proc, opt)
	prog.finish()
	if rep == nil {
		fmt.Fprintln(stderr, "tracelift-cli batch:", err)
		return 1
	}
	if rep.NoECG > 0 {
		fmt.Fprintf(stdout, "%d pages: %d digitized, %d up to date, %d without an ECG passed over, %d failed\n", len(rep.Results), rep.OK, rep.Skipped, rep.NoECG, rep.Failed)
		for _, r := range rep.Results {
			if r.Status == batch.StatusNoECG {
				fmt.Fprintf(stdout, "  passed over %s: %s\n", r.File, r.Error)
			}
		}
	} else {
		fmt.Fprintf(stdout, "%d files: %d digitized, %d up to date, %d failed\n", len(rep.Results), rep.OK, rep.Skipped, rep.Failed)
	}
	var rows []batch.Row
	for _, r := range rep.Results {
		rows = append(rows, r.Row())
	}
	fmt.Fprintf(stdout, "pages by verdict: %s\n", batch.CountVerdicts(rows))
	fmt.Fprintln(stdout, "summary:", rep.SummaryPath)
	fmt.Fprintln(stdout, "log:    ", rep.LogPath)
	fmt.Fprintln(stdout, pipeline.Caution)
	if err != nil {
		fmt.Fprintln(stderr, "tracelift-cli batch:", err)
	}
	if fails := rep.Failures(); len(fails) > 0 {
		fmt.Fprintf(stderr, "%d %s failed:\n", len(fails), plural(len(fails), "file", "files"))
		const show = 50
		for i, f := range fails {
			if i == show {
				fmt.Fprintf(stderr, "  … and %d more; see %s\n", len(fails)-show, rep.LogPath)
				break
			}
			fmt.Fprintf(stderr, "  %s: %s\n", f.File, f.Error)
		}
		return 1
	}
	if err != nil {
		return 1
	}
	return 0
}

// countPages counts the pages of a TIFF or PDF for ExpandPages; a file
// that cannot be opened counts as one page (its page worker reports why).
func countPages(c *commonFlags) func(string) int {
	opt := c.options().Load
	return func(path string) int {
		d, err := calib.OpenDocument(path, opt)
		if err != nil {
			return 1
		}
		return d.Pages
	}
}

// jsonLast makes sure the JSON document is written, and written last, so a
// page killed half-way through its exports is never taken as done.
func jsonLast(formats []string) []string {
	var out []string
	for _, f := range formats {
		if f != pipeline.FormatJSON {
			out = append(out, f)
		}
	}
	return append(out, pipeline.FormatJSON)
}

// extensions are the files each format leaves, as resume checks them.
func extensions(formats []string) []string {
	var out []string
	for _, f := range formats {
		switch f {
		case pipeline.FormatWFDB:
			out = append(out, "hea")
		default:
			out = append(out, f)
		}
	}
	return out
}

// passThrough returns the shared options the user set, for the page
// worker (which gets its own -o and --format).
func passThrough(fs *flag.FlagSet) []string {
	shared := map[string]bool{}
	probe := flag.NewFlagSet("", flag.ContinueOnError)
	var c commonFlags
	c.register(probe)
	probe.VisitAll(func(f *flag.Flag) { shared[f.Name] = true })
	var out []string
	fs.Visit(func(f *flag.Flag) {
		if shared[f.Name] && f.Name != "o" && f.Name != "format" {
			out = append(out, "-"+f.Name+"="+f.Value.String())
		}
	})
	return out
}

// inProcess digitizes in this process. A page past its deadline is
// abandoned: its goroutine runs on until the OpenCV call returns.
func inProcess(c *commonFlags, formats []string) batch.ProcessFunc {
	return func(ctx context.Context, in string, page int, dir, stem string) (batch.FileResult, error) {
		return digitizeOne(ctx, c, formats, in, page, dir, stem)
	}
}

// digitizeOne digitizes one input of a batch: page (from 1) of a document
// of several pages, screened first so that a cover sheet is passed over
// with a word instead of failed; 0 for a file taken whole.
func digitizeOne(ctx context.Context, c *commonFlags, formats []string, in string, page int, dir, stem string) (batch.FileResult, error) {
	var fr batch.FileResult
	opt := c.options()
	if page > 0 {
		opt.Load.Page, opt.FindPage, opt.Screen = page-1, false, true
	}
	o, err := pipeline.Process(ctx, in, opt)
	if o != nil {
		fr.TimingsMS = timingsMS(o.Timings)
	}
	if err != nil && errors.Is(err, pipeline.ErrNoECGPage) {
		fr.NoECG = strings.TrimSuffix(strings.TrimPrefix(err.Error(), in+" "), ": "+pipeline.ErrNoECGPage.Error())
		return fr, nil
	}
	if err != nil {
		return fr, namingFile(err, in)
	}
	fr.Page = pipeline.PageSource(o).Page
	if _, err := pipeline.Export(o, dir, stem, formats, pipeline.ExportOptions{RateHz: c.rate, Paper: c.paper, PDF: report.Write}); err != nil {
		return fr, namingFile(err, in)
	}
	b, err := json.Marshal(o)
	if err != nil {
		return fr, fmt.Errorf("%s: %w", in, err)
	}
	fr.SHA256, fr.Findings, err = batch.ParseDocument(b)
	return fr, err
}

func timingsMS(t pipeline.Timings) map[string]float64 {
	ms := func(d time.Duration) float64 { return float64(d.Microseconds()) / 1000 }
	return map[string]float64{"load": ms(t.Load), "calib": ms(t.Calib), "digitize": ms(t.Digitize), "measure": ms(t.Measure)}
}

func namingFile(err error, in string) error {
	if !strings.Contains(err.Error(), in) {
		err = fmt.Errorf("%s: %w", in, err)
	}
	return advise(err, in)
}

// hasAdvice matches messages that already say what to do.
var hasAdvice = regexp.MustCompile(`(?i)\b(give|check|scan|try|use|raise|save|choose|crop|rotate|photograph|remove|report)\b`)

// advise adds what to do to an error that only says what went wrong,
// chosen by the kind of error (the stages' sentinel errors).
//
// Whether the message already says what to do is judged on its words with
// the file's path taken out: a path holding "scan" or "check" is no advice.
func advise(err error, path string) error {
	if err == nil {
		return err
	}
	words := err.Error()
	if path != "" {
		words = strings.ReplaceAll(words, path, "")
		words = strings.ReplaceAll(words, filepath.Base(path), "")
	}
	if hasAdvice.MatchString(words) {
		return err
	}
	var what string
	switch {
	case errors.Is(err, fs.ErrNotExist):
		what = "check the path and the spelling of the file name"
	case errors.Is(err, fs.ErrPermission):
		what = "check that you may read the file"
	case errors.Is(err, calib.ErrEncrypted):
		what = "save or print the page again without a password, or export it as PNG"
	case errors.Is(err, calib.ErrFormat):
		what = "check that the file opens in an image viewer; if it is damaged or cut short, scan or export the page again as PNG, TIFF, JPEG or PDF"
	case errors.Is(err, calib.ErrTooBig):
		what = "scan at 300 dpi, or raise --max-megapixels / --max-megabytes"
	case errors.Is(err, calib.ErrNotECG), errors.Is(err, digitize.ErrNoTrace):
		what = "check that the file is an ECG printout; crop it to the paper and scan or photograph it again, flat and evenly lit"
	case errors.Is(err, calib.ErrNoScale):
		what = "give the scale by hand with --dpi or --px-per-mm"
	case errors.Is(err, digitize.ErrLayout):
		what = "give the layout by hand with --layout (" + record.LayoutNames(record.Layouts) + ")"
	case errors.Is(err, axis.ErrNoLead), errors.Is(err, axis.ErrTooShort), errors.Is(err, axis.ErrNoBeats):
		what = "check the traced signals in the CSV; a better scan of the page may help"
	case errors.Is(err, context.DeadlineExceeded), errors.Is(err, context.Canceled):
		return err
	default:
		what = "check the image; if it is a clear ECG printout, please report it with the file"
	}
	return fmt.Errorf("%w; %s", err, what)
}

// cmdServe is a page worker of a batch's pool: it digitizes the pages the
// parent sends on standard input (batch.Serve). Every option but -o comes
// from the parent; each request names its own output folder.
func cmdServe(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("batch "+serveArg, flag.ContinueOnError)
	var c commonFlags
	c.register(fs)
	pos, err := parseArgs(fs, args, stderr)
	if err != nil || len(pos) != 0 {
		fmt.Fprintln(stderr, "tracelift-cli batch: a page worker takes options only; it is started by 'tracelift-cli batch'")
		return 2
	}
	c.out = "(given per page)"
	if err := c.check(); err != nil {
		fmt.Fprintln(stderr, "tracelift-cli batch:", err)
		return 2
	}
	formats, _ := pipeline.ParseFormats(c.formats)
	c.seen(fs)
	err = batch.Serve(context.Background(), os.Stdin, stdout, func(ctx context.Context, in string, page int, dir, stem string) (batch.FileResult, error) {
		return digitizeOne(ctx, &c, formats, in, page, dir, stem)
	})
	if err != nil {
		fmt.Fprintln(stderr, "tracelift-cli batch:", err)
		return 1
	}
	return 0
}

// progress shows a bar with rate and time left on a terminal, plain lines
// otherwise (a log file, a job array's output).
type progress struct {
	w     io.Writer
	bar   *progressbar.ProgressBar
	quiet bool
	t0    time.Time
}

func newProgress(w io.Writer, total int, quiet bool) *progress {
	p := &progress{w: w, quiet: quiet, t0: time.Now()}
	if !quiet && isTerminal(w) && total > 0 {
		p.bar = progressbar.NewOptions(total,
			progressbar.OptionSetWriter(w),
			progressbar.OptionSetDescription("digitizing"),
			progressbar.OptionShowCount(),
			progressbar.OptionShowIts(),
			progressbar.OptionSetItsString("pages"),
			progressbar.OptionSetPredictTime(true),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionSetWidth(30),
		)
	}
	return p
}

func (p *progress) result(done, total int, r batch.Result) {
	if p.quiet {
		return
	}
	if p.bar != nil {
		if r.Status == batch.StatusFailed {
			p.bar.Clear()
			fmt.Fprintf(p.w, "failed %s: %s\n", r.File, r.Error)
		}
		p.bar.Add(1)
		return
	}
	el := time.Since(p.t0)
	rate := float64(done) / el.Minutes()
	left := time.Duration(float64(el) / float64(done) * float64(total-done)).Round(time.Second)
	line := fmt.Sprintf("[%d/%d] %-7s %s (%.1f s; %.1f pages/min, about %v left)", done, total, r.Status, r.File, r.Seconds, rate, left)
	if r.Status == batch.StatusFailed || r.Status == batch.StatusNoECG {
		line += ": " + r.Error
	}
	fmt.Fprintln(p.w, line)
}

func (p *progress) finish() {
	if p.bar != nil {
		p.bar.Finish()
		fmt.Fprintln(p.w)
	}
}

func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	fi, err := f.Stat()
	return err == nil && fi.Mode()&os.ModeCharDevice != 0
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}
