package batch

import (
	"bufio"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"sync/atomic"
	"testing"
	"time"
)

// writeTree makes files below dir; content "" gets a default body.
func writeTree(t *testing.T, dir string, files map[string]string) {
	t.Helper()
	for rel, body := range files {
		p := filepath.Join(dir, filepath.FromSlash(rel))
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if body == "" {
			body = "hr=60\n"
		}
		if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

// fake is a ProcessFunc that reads "hr=N" from the file and writes a CSV
// and a JSON document in the shape of the pipeline's; "fail" makes it fail,
// "panic" panics, "hang" blocks ignoring ctx, "slow" blocks until ctx ends,
// "partial" writes the CSV and fails.
type fake struct{ calls atomic.Int64 }

func (f *fake) process(ctx context.Context, in string, page int, dir, stem string) (FileResult, error) {
	f.calls.Add(1)
	b, err := os.ReadFile(in)
	if err != nil {
		return FileResult{}, err
	}
	body := string(b)
	switch {
	case strings.HasPrefix(body, "fail"):
		return FileResult{}, fmt.Errorf("calib: %s: no ECG grid found; scan the page again", in)
	case strings.HasPrefix(body, "panic"):
		panic("fake trouble")
	case strings.HasPrefix(body, "hang"):
		time.Sleep(3 * time.Second)
		return FileResult{}, nil
	case strings.HasPrefix(body, "slow"):
		<-ctx.Done()
		return FileResult{}, ctx.Err()
	}
	if err := os.WriteFile(filepath.Join(dir, stem+".csv"), []byte("time_s,I\n0,0\n"), 0o644); err != nil {
		return FileResult{}, err
	}
	if strings.HasPrefix(body, "partial") {
		return FileResult{}, errors.New("export pdf: disk full")
	}
	hr := 0.0
	fmt.Sscanf(body, "hr=%g", &hr)
	sum := sha256.Sum256(b)
	doc := map[string]any{
		"image_sha256":   hex.EncodeToString(sum[:]),
		"heart_rate_bpm": hr,
		"intervals_ms":   map[string]any{"pr": 160, "qrs": 90, "qt": 400, "qtc_bazett": 400 / math.Sqrt(60/hr)},
		"axis":           map[string]any{"qrs_deg": 45},
		"transition":     "V3",
		"quality":        map[string]any{"I": map[string]any{"confidence": 0.9}, "II": map[string]any{"confidence": 0.7}, "III": map[string]any{"confidence": 0.8}},
		"calibration":    map[string]any{"confidence": 0.95},
	}
	jb, _ := json.Marshal(doc)
	if err := os.WriteFile(filepath.Join(dir, stem+".json"), jb, 0o644); err != nil {
		return FileResult{}, err
	}
	sha, fd, err := ParseDocument(jb)
	return FileResult{SHA256: sha, Findings: fd, TimingsMS: map[string]float64{"calib": 1}}, err
}

func readLog(t *testing.T, p string) []Result {
	t.Helper()
	f, err := os.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []Result
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r Result
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			t.Fatalf("log line %q is not JSON: %v", sc.Text(), err)
		}
		out = append(out, r)
	}
	return out
}

func readSummaryFile(t *testing.T, p string) []Row {
	t.Helper()
	f, err := os.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := ReadSummary(f)
	if err != nil {
		t.Fatal(err)
	}
	return rows
}

func TestRun(t *testing.T) {
	t.Parallel()
	src, out := t.TempDir(), t.TempDir()
	writeTree(t, src, map[string]string{
		"w1/a.png": "hr=60", "w1/b.png": "hr=75", "w2/c.png": "fail", "w2/d.png": "panic",
		"e.png": "partial", "f, \"odd\".png": "hr=90",
	})
	ins, err := Collect(src, CollectOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var fk fake
	calls := 0
	rep, err := Run(context.Background(), ins, fk.process, Options{Out: out, Jobs: 3, Expect: []string{"csv"},
		OnResult: func(done, total int, r Result) {
			calls++
			if done != calls || total != len(ins) {
				t.Errorf("progress %d/%d after %d calls", done, total, calls)
			}
		}})
	if err != nil {
		t.Fatal(err)
	}
	if rep.OK != 3 || rep.Failed != 3 || rep.Skipped != 0 {
		t.Fatalf("ok %d failed %d skipped %d", rep.OK, rep.Failed, rep.Skipped)
	}
	// Characters other systems reject in names are replaced by "_".
	for _, p := range []string{"w1/a.csv", "w1/a.json", "w1/b.json", `f, _odd_.csv`} {
		if _, err := os.Stat(filepath.Join(out, p)); err != nil {
			t.Errorf("output %s missing: %v", p, err)
		}
	}
	// The failed files left nothing behind, not even the partial CSV.
	for _, p := range []string{"w2/c.csv", "w2/d.csv", "e.csv", "e.json"} {
		if _, err := os.Stat(filepath.Join(out, p)); err == nil {
			t.Errorf("failed file left %s", p)
		}
	}
	ents, _ := os.ReadDir(out)
	for _, e := range ents {
		if strings.HasPrefix(e.Name(), ".tracelift-work") {
			t.Errorf("scratch folder %s left behind", e.Name())
		}
	}
	logged := readLog(t, rep.LogPath)
	if len(logged) != len(ins) {
		t.Fatalf("log has %d lines for %d files", len(logged), len(ins))
	}
	byFile := map[string]Result{}
	for _, r := range logged {
		byFile[r.File] = r
	}
	if r := byFile["w2/d.png"]; r.Status != StatusFailed || !strings.Contains(r.Error, "internal error") || !strings.Contains(r.Error, "d.png") {
		t.Errorf("panicking page logged as %+v", r)
	}
	if r := byFile["w2/c.png"]; !strings.Contains(r.Error, "no ECG grid") {
		t.Errorf("failing page logged as %+v", r)
	}
	if r := byFile["w1/b.png"]; r.Status != StatusOK || r.Findings == nil || r.Findings.HeartRateBPM != 75 || len(r.Outputs) != 2 {
		t.Errorf("good page logged as %+v %+v", r, r.Findings)
	}
	rows := readSummaryFile(t, rep.SummaryPath)
	if len(rows) != len(ins) {
		t.Fatalf("summary has %d rows", len(rows))
	}
	for _, r := range rows {
		if r.File == "w1/b.png" {
			f := r.Findings
			// Bazett: QTc = QT/√RR (Bazett 1920); RR = 0.8 s at 75/min,
			// 400/√0.8 = 447.214 ms.
			if f.HeartRateBPM != 75 || f.PRMS != 160 || math.Abs(f.QTcBazettMS-447.214) > 0.001 ||
				f.QRSAxisDeg != 45 || f.Transition != "V3" || f.MedianLeadConfidence != 0.8 {
				t.Errorf("summary row %+v", r)
			}
		}
		if r.File == `f, "odd".png` && r.Status != StatusOK {
			t.Errorf("a name with a comma and quotes did not survive the CSV: %+v", r)
		}
	}
	if len(rep.Failures()) != 3 {
		t.Errorf("Failures lists %d", len(rep.Failures()))
	}
}

func TestResume(t *testing.T) {
	t.Parallel()
	src, out := t.TempDir(), t.TempDir()
	writeTree(t, src, map[string]string{"a.png": "hr=60", "b.png": "hr=70", "c.png": "hr=80", "d.png": "hr=90", "e.png": "fail"})
	ins, err := Collect(src, CollectOptions{})
	if err != nil {
		t.Fatal(err)
	}
	opt := Options{Out: out, Jobs: 2, Expect: []string{"csv"}}
	var fk fake
	if _, err := Run(context.Background(), ins, fk.process, opt); err != nil {
		t.Fatal(err)
	}
	// A run killed while writing the log leaves half a line.
	lf, _ := os.OpenFile(filepath.Join(out, LogName(0, 0)), os.O_WRONLY|os.O_APPEND, 0)
	lf.WriteString(`{"time":"2026-`)
	lf.Close()
	// Change a's image, remove b's CSV, spoil c's JSON; d stays as it was.
	writeTree(t, src, map[string]string{"a.png": "hr=65"})
	os.Remove(filepath.Join(out, "b.csv"))
	os.WriteFile(filepath.Join(out, "c.json"), []byte(`{"image_sha256": `), 0o644)
	fk.calls.Store(0)
	rep, err := Run(context.Background(), ins, fk.process, opt)
	if err != nil {
		t.Fatal(err)
	}
	status := map[string]Status{}
	for _, r := range rep.Results {
		status[r.File] = r.Status
	}
	want := map[string]Status{"a.png": StatusOK, "b.png": StatusOK, "c.png": StatusOK, "d.png": StatusSkipped, "e.png": StatusFailed}
	for f, s := range want {
		if status[f] != s {
			t.Errorf("%s: %s, want %s", f, status[f], s)
		}
	}
	if fk.calls.Load() != 4 {
		t.Errorf("%d pages digitized again, want 4 (all but d)", fk.calls.Load())
	}
	// The skipped file's findings come from its JSON document.
	for _, r := range readSummaryFile(t, rep.SummaryPath) {
		if r.File == "d.png" && r.Findings.HeartRateBPM != 90 {
			t.Errorf("skipped row %+v", r)
		}
	}
	// The log grows: two runs, five whole lines each, and the broken line
	// stays on a line of its own.
	b, _ := os.ReadFile(rep.LogPath)
	good, broken := 0, 0
	for _, l := range strings.Split(strings.TrimSpace(string(b)), "\n") {
		var r Result
		if json.Unmarshal([]byte(l), &r) == nil {
			good++
		} else {
			broken++
		}
	}
	if good != 10 || broken != 1 {
		t.Errorf("log has %d whole and %d broken lines after two runs, want 10 and 1", good, broken)
	}
	// NoResume digitizes everything.
	fk.calls.Store(0)
	opt.NoResume = true
	if _, err := Run(context.Background(), ins, fk.process, opt); err != nil {
		t.Fatal(err)
	}
	if fk.calls.Load() != 5 {
		t.Errorf("NoResume digitized %d of 5", fk.calls.Load())
	}
}

func TestPageTimeout(t *testing.T) {
	t.Parallel()
	src, out := t.TempDir(), t.TempDir()
	writeTree(t, src, map[string]string{"hang.png": "hang", "slow.png": "slow", "ok.png": "hr=60"})
	ins, _ := Collect(src, CollectOptions{})
	var fk fake
	t0 := time.Now()
	rep, err := Run(context.Background(), ins, fk.process, Options{Out: out, Jobs: 1,
		PageTimeout: 200 * time.Millisecond, Grace: 200 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	// One worker, so the pages ran one after another: the hung page must
	// have been given up at timeout + grace, well before its 3 s sleep.
	if d := time.Since(t0); d > 2500*time.Millisecond {
		t.Errorf("batch took %v; the hung page was not abandoned", d)
	}
	for _, r := range rep.Results {
		switch r.File {
		case "hang.png":
			if r.Status != StatusFailed || !strings.Contains(r.Error, "abandoned") || !strings.Contains(r.Error, "--page-timeout") {
				t.Errorf("hung page: %+v", r)
			}
		case "slow.png":
			if r.Status != StatusFailed || !strings.Contains(r.Error, "longer than") || strings.Contains(r.Error, "abandoned") {
				t.Errorf("slow page: %+v", r)
			}
		case "ok.png":
			if r.Status != StatusOK {
				t.Errorf("the page after a timeout: %+v", r)
			}
		}
	}
}

func TestInterrupt(t *testing.T) {
	t.Parallel()
	src, out := t.TempDir(), t.TempDir()
	files := map[string]string{}
	for i := 0; i < 20; i++ {
		files[fmt.Sprintf("%02d.png", i)] = "slow"
	}
	writeTree(t, src, files)
	ins, _ := Collect(src, CollectOptions{})
	ctx, cancel := context.WithCancel(context.Background())
	time.AfterFunc(100*time.Millisecond, cancel)
	var fk fake
	rep, err := Run(ctx, ins, fk.process, Options{Out: out, Jobs: 2})
	if !errors.Is(err, context.Canceled) || rep == nil || !rep.Interrupted {
		t.Fatalf("Run after cancel: %v, %+v", err, rep)
	}
	if len(rep.Results) >= len(ins) || len(readSummaryFile(t, rep.SummaryPath)) != len(rep.Results) {
		t.Errorf("%d results, summary should hold the handled files only", len(rep.Results))
	}
}

func TestOutputsStayInside(t *testing.T) {
	t.Parallel()
	src, out, outside := t.TempDir(), t.TempDir(), t.TempDir()
	writeTree(t, src, map[string]string{"sub/a.png": "hr=60", "b.png": "hr=60", "c.png": "hr=60"})
	// A link planted in OUT where a folder of outputs goes, and one where
	// an output file goes.
	if err := os.Symlink(outside, filepath.Join(out, "sub")); err != nil {
		t.Fatal(err)
	}
	if err := os.Symlink(filepath.Join(outside, "stolen.json"), filepath.Join(out, "b.json")); err != nil {
		t.Fatal(err)
	}
	ins, _ := Collect(src, CollectOptions{})
	// A list entry smuggled past Collect still cannot climb out.
	ins = append(ins, Input{Path: filepath.Join(src, "c.png"), Rel: "../../c.png", Stem: "c"})
	var fk fake
	rep, err := Run(context.Background(), ins, fk.process, Options{Out: out, Jobs: 2})
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]Result{}
	for _, r := range rep.Results {
		got[r.File] = r
	}
	if r := got["sub/a.png"]; r.Status != StatusFailed || !strings.Contains(r.Error, "symbolic link") {
		t.Errorf("output through a linked folder: %+v", r)
	}
	if r := got["b.png"]; r.Status != StatusFailed || !strings.Contains(r.Error, "symbolic link") {
		t.Errorf("output over a linked file: %+v", r)
	}
	if r := got["../../c.png"]; r.Status != StatusFailed || !strings.Contains(r.Error, "out of the output folder") {
		t.Errorf("output with ..: %+v", r)
	}
	if r := got["c.png"]; r.Status != StatusOK {
		t.Errorf("plain file: %+v", r)
	}
	ents, _ := os.ReadDir(outside)
	if len(ents) != 0 {
		t.Errorf("something was written outside OUT: %v", ents)
	}
	if _, err := os.Stat(filepath.Join(filepath.Dir(filepath.Dir(out)), "c.csv")); err == nil {
		t.Error("c.csv escaped two levels up")
	}
}

func TestHashMatchesSha256sum(t *testing.T) {
	t.Parallel()
	p := filepath.Join(t.TempDir(), "abc")
	os.WriteFile(p, []byte("abc"), 0o644)
	got, err := hashFile(context.Background(), p, 1<<30)
	// SHA-256("abc") from FIPS 180-2, Appendix B.1.
	if err != nil || got != "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad" {
		t.Errorf("hash %s, %v", got, err)
	}
}
