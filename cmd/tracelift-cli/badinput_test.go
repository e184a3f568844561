package main

// Bad input and limits, end to end: the command-line tool is built once and
// run as a user would run it, on files made here (broken copies of the
// embedded demo printouts, random bytes, pages without an ECG…). Each bad
// file must give a non-zero exit and a message that names the file and
// says what to do; never a panic, never a hang. The batch command's exit
// codes, resume, timeouts and shards are checked the same way.

import (
	"bytes"
	"context"
	"encoding/binary"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"hash/crc32"
	"image"
	"image/color"
	"image/draw"
	"image/jpeg"
	"image/png"
	"math"
	"math/rand"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"sort"
	"strings"
	"testing"
	"time"

	"github.com/disintegration/imaging"
	"github.com/go-pdf/fpdf"
	"golang.org/x/image/tiff"

	"tracelift/samples"
	"tracelift/samples/dipole"
)

var cliPath string

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "tracelift-cli-test-")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	cliPath = filepath.Join(dir, "tracelift-cli")
	out, err := exec.Command("go", "build", "-o", cliPath, ".").CombinedOutput()
	if err != nil {
		fmt.Fprintf(os.Stderr, "building the command-line tool failed: %v\n%s", err, out)
		os.RemoveAll(dir)
		os.Exit(1)
	}
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

// cli runs the built tool with a time limit; a hang fails the test.
func cli(t *testing.T, limit time.Duration, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), limit)
	defer cancel()
	cmd := exec.CommandContext(ctx, cliPath, args...)
	var o, e bytes.Buffer
	cmd.Stdout, cmd.Stderr = &o, &e
	err := cmd.Run()
	if ctx.Err() != nil {
		t.Fatalf("tracelift-cli %s did not finish within %v (a hang)\nstderr: %s", strings.Join(args, " "), limit, e.String())
	}
	if err != nil {
		ee, ok := err.(*exec.ExitError)
		if !ok {
			t.Fatalf("running tracelift-cli: %v", err)
		}
		code = ee.ExitCode()
	}
	return code, o.String(), e.String()
}

// noCrash fails on Go runtime crash reports in the output.
func noCrash(t *testing.T, stderr string) {
	t.Helper()
	for _, w := range []string{"panic", "goroutine ", "SIGSEGV", "fatal error"} {
		if strings.Contains(stderr, w) {
			t.Errorf("stderr holds %q, a crash:\n%s", w, stderr)
		}
	}
}

// advice are words that tell the user what to do next; a clear message
// carries at least one.
var advice = regexp.MustCompile(`(?i)\b(give|check|scan|rescan|try|use|raise|lower|save|export|choose|crop|rotate|convert|photograph|retake|set|supply|pass|remove|report|run|re-?)\b`)

// clearFailure checks a failing run's message: it names the file, carries
// a package prefix, says what to do, and is no crash report.
func clearFailure(t *testing.T, file, stderr string) {
	t.Helper()
	noCrash(t, stderr)
	if !strings.Contains(stderr, file) && !strings.Contains(stderr, filepath.Base(file)) {
		t.Errorf("the message does not name %s:\n%s", file, stderr)
	}
	if !regexp.MustCompile(`tracelift-cli \w+: (\S+: )*[a-z/]+: `).MatchString(stderr) && !strings.Contains(stderr, "tracelift-cli digitize: calib:") {
		t.Errorf("the message has no package prefix (e.g. \"calib: \"):\n%s", stderr)
	}
	if !advice.MatchString(stderr) {
		t.Errorf("the message does not say what to do:\n%s", stderr)
	}
}

func demo(t *testing.T, name string) []byte {
	t.Helper()
	for _, d := range samples.Demo() {
		if d.Name == name {
			return d.Data
		}
	}
	t.Fatalf("no demo printout %s", name)
	return nil
}

func decode(t *testing.T, b []byte) image.Image {
	t.Helper()
	m, _, err := image.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func encodePNG(t *testing.T, m image.Image) []byte {
	t.Helper()
	var buf bytes.Buffer
	if err := png.Encode(&buf, m); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func uniform(w, h int, c color.Color) *image.NRGBA {
	m := image.NewNRGBA(image.Rect(0, 0, w, h))
	draw.Draw(m, m.Bounds(), image.NewUniform(c), image.Point{}, draw.Src)
	return m
}

// renderPNG draws an invented signal with the sample renderer.
func renderPNG(t *testing.T, st samples.Style) []byte {
	t.Helper()
	rec := dipole.Generate(dipole.Params{HeartRateBPM: 70, QRSAxisDeg: 50, PAxisDeg: 50, TAxisDeg: 40, Seed: 9})
	p, err := samples.Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	return encodePNG(t, p.Image)
}

// photo is a picture with no ECG in it: a sky-to-ground gradient, a few
// discs and sensor noise, as a JPEG.
func photo(t *testing.T) []byte {
	t.Helper()
	rng := rand.New(rand.NewSource(5))
	const w, h = 1600, 1200
	m := image.NewNRGBA(image.Rect(0, 0, w, h))
	type disc struct{ x, y, r float64 }
	var ds []disc
	for i := 0; i < 6; i++ {
		ds = append(ds, disc{rng.Float64() * w, rng.Float64() * h, 40 + rng.Float64()*200})
	}
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			f := float64(y) / h
			r, g, b := 120+100*(1-f), 160+60*(1-f), 230-150*f
			for _, d := range ds {
				if math.Hypot(float64(x)-d.x, float64(y)-d.y) < d.r {
					r, g, b = 200, 90, 40
				}
			}
			n := rng.NormFloat64() * 6
			m.SetNRGBA(x, y, color.NRGBA{clamp(r + n), clamp(g + n), clamp(b + n), 255})
		}
	}
	var buf bytes.Buffer
	if err := jpeg.Encode(&buf, m, &jpeg.Options{Quality: 85}); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func clamp(v float64) uint8 { return uint8(math.Max(0, math.Min(255, v))) }

func pdfOf(t *testing.T, pngData []byte) []byte {
	t.Helper()
	pdf := fpdf.New("L", "mm", "A4", "")
	pdf.RegisterImageOptionsReader("page", fpdf.ImageOptions{ImageType: "PNG"}, bytes.NewReader(pngData))
	pdf.AddPage()
	pdf.ImageOptions("page", 0, 0, 297, 210, false, fpdf.ImageOptions{ImageType: "PNG"}, 0, "")
	var buf bytes.Buffer
	if err := pdf.Output(&buf); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func tiffOf(t *testing.T, m image.Image) []byte {
	t.Helper()
	var buf bytes.Buffer
	if err := tiff.Encode(&buf, m, &tiff.Options{Compression: tiff.Deflate}); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func half(b []byte) []byte { return append([]byte(nil), b[:len(b)/2]...) }

// pngClaiming is a tiny PNG whose header claims w × h pixels (a
// decompression bomb's shape): the IHDR chunk is rewritten and its CRC-32
// recomputed (PNG specification, ISO/IEC 15948, §5.3 and §11.2.2).
func pngClaiming(t *testing.T, w, h uint32) []byte {
	b := encodePNG(t, uniform(1, 1, color.White))
	// 8-byte signature, then IHDR: length(4) "IHDR"(4) width(4) height(4) …
	binary.BigEndian.PutUint32(b[16:], w)
	binary.BigEndian.PutUint32(b[20:], h)
	binary.BigEndian.PutUint32(b[29:], crc32.ChecksumIEEE(b[12:29]))
	// The standard library's reader checks the chunk CRC: the header is
	// well formed and says what we wrote.
	if c, err := png.DecodeConfig(bytes.NewReader(b)); err != nil || c.Width != int(w) || c.Height != int(h) {
		t.Fatalf("crafted header reads as %v, %v", c, err)
	}
	return b
}

// Outcomes a case may have.
const (
	mustFail = iota // exit 1 with a clear message
	either          // exit 0, or exit 1 with a clear message: the pipeline decides, the test reports
)

func TestBadInput(t *testing.T) {
	cleanPNG := demo(t, "hillcrest_clean_300dpi.png")
	photoJPG := demo(t, "lakeview_phone_photo.jpg")
	faxPNG := demo(t, "station4_fax.png")
	rng := rand.New(rand.NewSource(1))
	random := make([]byte, 64<<10)
	rng.Read(random)

	noPulse := samples.DefaultStyle()
	noPulse.Pulses = false
	oneLead := samples.DefaultStyle()
	oneLead.Layout = samples.Layout1x1
	oneLead.RhythmLeads = []string{"II"}

	cases := []struct {
		name, file string
		data       func() []byte
		args       []string
		want       int
	}{
		{"empty file", "empty.png", func() []byte { return nil }, nil, mustFail},
		{"truncated PNG", "cut.png", func() []byte { return half(cleanPNG) }, nil, mustFail},
		{"truncated JPEG", "cut.jpg", func() []byte { return half(photoJPG) }, nil, mustFail},
		{"truncated TIFF", "cut.tif", func() []byte { return half(tiffOf(t, decode(t, faxPNG))) }, nil, mustFail},
		{"truncated PDF", "cut.pdf", func() []byte { return half(pdfOf(t, faxPNG)) }, nil, mustFail},
		{"text named .png", "letter.png", func() []byte { return []byte("Dear colleague,\nplease find the tracing enclosed.\n") }, nil, mustFail},
		{"text file", "notes.txt", func() []byte { return []byte("ward round notes\n") }, nil, mustFail},
		{"random bytes", "noise.png", func() []byte { return random }, nil, mustFail},
		{"random bytes as JPEG", "noise.jpg", func() []byte { return random }, nil, mustFail},
		{"1x1 image", "dot.png", func() []byte { return encodePNG(t, uniform(1, 1, color.White)) }, nil, mustFail},
		{"blank page", "blank.png", func() []byte { return encodePNG(t, uniform(1240, 1754, color.White)) }, nil, mustFail},
		{"photo with no ECG", "holiday.jpg", func() []byte { return photo(t) }, nil, mustFail},
		{"over the pixel limit", "big.png", func() []byte { return cleanPNG }, []string{"--max-megapixels", "1"}, mustFail},
		{"header claiming 60000x60000 pixels", "bomb.png", func() []byte { return pngClaiming(t, 60000, 60000) }, nil, mustFail},
		{"over the byte limit", "heavy.png", func() []byte { return cleanPNG }, []string{"--max-megabytes", "0.01"}, mustFail},
		{"PNG named .tif", "misnamed.tif", func() []byte { return faxPNG }, nil, either},
		{"upside-down page", "upside_down.png", func() []byte { return encodePNG(t, imaging.Rotate180(decode(t, cleanPNG))) }, nil, either},
		{"no calibration pulse", "no_pulse.png", func() []byte { return renderPNG(t, noPulse) }, nil, either},
		{"one-lead strip", "one_lead.png", func() []byte { return renderPNG(t, oneLead) }, nil, either},
	}
	dir := t.TempDir()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			in := filepath.Join(dir, c.file)
			if err := os.WriteFile(in, c.data(), 0o644); err != nil {
				t.Fatal(err)
			}
			out := filepath.Join(dir, "out-"+c.file)
			args := append([]string{"digitize", in, "-o", out}, c.args...)
			code, stdout, stderr := cli(t, 90*time.Second, args...)
			noCrash(t, stderr)
			switch {
			case code == 1:
				t.Logf("exit 1: %s", strings.TrimSpace(stderr))
				clearFailure(t, in, stderr)
			case code == 0 && c.want == either:
				t.Logf("exit 0: %s", strings.TrimSpace(stdout))
				if _, err := os.Stat(filepath.Join(out, strings.TrimSuffix(c.file, filepath.Ext(c.file))+".json")); err != nil {
					t.Errorf("exit 0 but no JSON document: %v", err)
				}
			default:
				t.Errorf("exit %d, want %s\nstdout: %s\nstderr: %s", code, map[int]string{mustFail: "1", either: "0 or 1"}[c.want], stdout, stderr)
			}
		})
	}
	t.Run("missing file", func(t *testing.T) {
		in := filepath.Join(dir, "not-there.png")
		code, _, stderr := cli(t, 30*time.Second, "digitize", in, "-o", dir)
		if code != 1 {
			t.Errorf("exit %d, want 1", code)
		}
		clearFailure(t, in, stderr)
	})
	t.Run("folder instead of a file", func(t *testing.T) {
		code, _, stderr := cli(t, 30*time.Second, "digitize", dir, "-o", filepath.Join(dir, "o"))
		if code != 1 {
			t.Errorf("exit %d, want 1", code)
		}
		clearFailure(t, dir, stderr)
	})
}

func TestUsageErrors(t *testing.T) {
	dir := t.TempDir()
	img := filepath.Join(dir, "a.png")
	os.WriteFile(img, encodePNG(t, uniform(4, 4, color.White)), 0o644)
	for _, args := range [][]string{
		{},
		{"no-such-command"},
		{"digitize"},
		{"digitize", img},
		{"digitize", img, img, "-o", dir},
		{"digitize", img, "-o", dir, "--format", "docx"},
		{"digitize", img, "-o", dir, "--page", "0"},
		{"digitize", img, "-o", dir, "--no-such-flag"},
		{"batch"},
		{"batch", dir},
		{"batch", dir, "-o", filepath.Join(dir, "o"), "--shard", "4/3"},
		{"batch", dir, "-o", filepath.Join(dir, "o"), "--shard", "x"},
		{"batch", dir, "-o", filepath.Join(dir, "o"), "--jobs", "0"},
		{"batch", filepath.Join(dir, "missing"), "-o", filepath.Join(dir, "o")},
		{"merge"},
		{"merge", dir},
		{"merge", t.TempDir(), "-o", filepath.Join(dir, "m")},
	} {
		code, _, stderr := cli(t, 30*time.Second, args...)
		noCrash(t, stderr)
		if code != 2 {
			t.Errorf("tracelift-cli %s: exit %d, want 2 (usage error)\n%s", strings.Join(args, " "), code, stderr)
		}
		if strings.TrimSpace(stderr) == "" {
			t.Errorf("tracelift-cli %s: no message", strings.Join(args, " "))
		}
	}
}

// batchInputs makes a folder with one good demo page and a few bad files.
func batchInputs(t *testing.T) (dir string, good []string, bad []string) {
	t.Helper()
	dir = t.TempDir()
	write := func(rel string, b []byte) {
		p := filepath.Join(dir, filepath.FromSlash(rel))
		os.MkdirAll(filepath.Dir(p), 0o755)
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	write("ward1/page.png", demo(t, "hillcrest_clean_300dpi.png"))
	write("ward1/empty.png", nil)
	write("ward2/cut.jpg", half(demo(t, "lakeview_phone_photo.jpg")))
	write("ward2/blank.png", encodePNG(t, uniform(300, 200, color.White)))
	write("ward2/readme.txt", []byte("not an image: not collected"))
	return dir, []string{"ward1/page.png"}, []string{"ward1/empty.png", "ward2/blank.png", "ward2/cut.jpg"}
}

func readRows(t *testing.T, p string) map[string][]string {
	t.Helper()
	f, err := os.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	rows := map[string][]string{}
	for _, r := range recs[1:] {
		rows[r[0]] = r
	}
	return rows
}

func TestBatchCLI(t *testing.T) {
	in, good, bad := batchInputs(t)
	out := t.TempDir()
	code, stdout, stderr := cli(t, 3*time.Minute, "batch", in, "-o", out, "--jobs", "2")
	noCrash(t, stderr)
	t.Logf("stdout:\n%s\nstderr:\n%s", stdout, stderr)
	if code != 1 {
		t.Fatalf("exit %d, want 1 (some files failed)", code)
	}
	for _, b := range bad {
		if !strings.Contains(stderr, b) {
			t.Errorf("failed file %s not listed on stderr", b)
		}
	}
	rows := readRows(t, filepath.Join(out, "summary.csv"))
	if len(rows) != len(good)+len(bad) {
		t.Fatalf("summary has %d rows, want %d", len(rows), len(good)+len(bad))
	}
	for _, b := range bad {
		if rows[b][1] != "failed" || rows[b][2] == "" {
			t.Errorf("summary row of %s: %v", b, rows[b])
		}
	}
	g := rows[good[0]]
	if g[1] != "ok" {
		t.Fatalf("the demo page failed in the batch: %v", g)
	}
	// The demo was drawn at 72/min (samples/demo.go, invented signal); a
	// rate within 5 % shows the row carries the page's findings.
	if hr := parseF(g[3]); math.Abs(hr-72) > 3.6 {
		t.Errorf("summary heart rate %q for a 72/min demo", g[3])
	}
	for _, ext := range []string{".csv", ".json"} {
		if _, err := os.Stat(filepath.Join(out, "ward1", "page"+ext)); err != nil {
			t.Errorf("output missing: %v", err)
		}
	}
	var doc struct {
		SHA string `json:"image_sha256"`
	}
	b, _ := os.ReadFile(filepath.Join(out, "ward1", "page.json"))
	if json.Unmarshal(b, &doc) != nil || doc.SHA == "" {
		t.Errorf("page.json has no image_sha256")
	}
	lines := strings.Split(strings.TrimSpace(readFile(t, filepath.Join(out, "batch-log.jsonl"))), "\n")
	if len(lines) != 4 {
		t.Errorf("log has %d lines, want 4", len(lines))
	}
	for _, l := range lines {
		var r map[string]any
		if err := json.Unmarshal([]byte(l), &r); err != nil {
			t.Errorf("log line is not JSON: %s", l)
		} else if r["status"] == "ok" && !(r["peak_rss_mb"].(float64) > 0) {
			t.Errorf("ok line without the worker's peak memory: %s", l)
		}
	}

	// Again: the good page is up to date, the bad ones are tried again.
	code, _, stderr = cli(t, 2*time.Minute, "batch", in, "-o", out, "--jobs", "2")
	noCrash(t, stderr)
	if code != 1 {
		t.Errorf("rerun exit %d, want 1", code)
	}
	if r := readRows(t, filepath.Join(out, "summary.csv"))[good[0]]; r[1] != "skipped" || r[3] != g[3] {
		t.Errorf("rerun did not resume the good page: %v (first run %v)", r, g)
	}

	// A page past its time limit is stopped and failed; the batch goes on.
	out2 := t.TempDir()
	code, _, stderr = cli(t, time.Minute, "batch", in, "-o", out2, "--jobs", "1", "--page-timeout", "50ms")
	noCrash(t, stderr)
	if code != 1 || !strings.Contains(stderr, "took longer than 50ms") {
		t.Errorf("with --page-timeout 50ms: exit %d\n%s", code, stderr)
	}
}

// TestBatchShardsCLI runs three shards as separate processes into one
// folder, merges their summaries and compares with one unsharded run.
func TestBatchShardsCLI(t *testing.T) {
	in, good, bad := batchInputs(t)
	one, sharded := t.TempDir(), t.TempDir()
	if code, _, stderr := cli(t, 3*time.Minute, "batch", in, "-o", one, "--jobs", "2"); code != 1 {
		t.Fatalf("unsharded: exit %d\n%s", code, stderr)
	}
	for k := 1; k <= 3; k++ {
		code, _, stderr := cli(t, 3*time.Minute, "batch", in, "-o", sharded, "--jobs", "1", "--shard", fmt.Sprintf("%d/3", k))
		noCrash(t, stderr)
		if code != 0 && code != 1 {
			t.Fatalf("shard %d/3: exit %d\n%s", k, code, stderr)
		}
	}
	merged := filepath.Join(sharded, "all")
	code, stdout, stderr := cli(t, time.Minute, "merge", sharded, "-o", merged, "--inputs", in)
	noCrash(t, stderr)
	// The bad files failed, so merge reports them and exits 1; nothing is
	// missing or doubled.
	if code != 1 || strings.Contains(stderr, "more than one") || strings.Contains(stderr, "no summary") {
		t.Errorf("merge: exit %d\n%s\n%s", code, stdout, stderr)
	}
	a := readRows(t, filepath.Join(one, "summary.csv"))
	b := readRows(t, filepath.Join(merged, "summary.csv"))
	var ka, kb []string
	for k, r := range a {
		ka = append(ka, k+" "+r[1]+" "+r[3])
	}
	for k, r := range b {
		kb = append(kb, k+" "+r[1]+" "+r[3])
	}
	sort.Strings(ka)
	sort.Strings(kb)
	if strings.Join(ka, "\n") != strings.Join(kb, "\n") || len(ka) != len(good)+len(bad) {
		t.Errorf("unsharded:\n%s\nmerged shards:\n%s", strings.Join(ka, "\n"), strings.Join(kb, "\n"))
	}
}

func parseF(s string) float64 {
	var v float64
	if _, err := fmt.Sscan(s, &v); err != nil {
		return math.NaN()
	}
	return v
}

func readFile(t *testing.T, p string) string {
	t.Helper()
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// TestBatchListCLI: list entries that would climb out of the base folder,
// absolute paths outside it and missing files fail by name; the batch goes
// on and writes nothing outside OUT.
func TestBatchListCLI(t *testing.T) {
	base, out, outside := t.TempDir(), t.TempDir(), t.TempDir()
	os.WriteFile(filepath.Join(base, "empty.png"), nil, 0o644)
	list := filepath.Join(base, "pages.txt")
	entries := []string{"# archive box 7", "../up.png", "a/../../up2.png", filepath.Join(outside, "elsewhere.png"), "missing.png", "empty.png"}
	os.WriteFile(list, []byte(strings.Join(entries, "\n")+"\n"), 0o644)
	code, stdout, stderr := cli(t, time.Minute, "batch", list, "-o", out)
	noCrash(t, stderr)
	if code != 1 {
		t.Fatalf("exit %d, want 1\n%s\n%s", code, stdout, stderr)
	}
	for _, e := range entries[1:] {
		if !strings.Contains(stderr, e) {
			t.Errorf("%s not listed as failed:\n%s", e, stderr)
		}
	}
	if !strings.Contains(stderr, `contains ".."`) || !strings.Contains(stderr, "outside the base folder") || !strings.Contains(stderr, "does not exist") {
		t.Errorf("the reasons are not given:\n%s", stderr)
	}
	if ents, _ := os.ReadDir(outside); len(ents) != 0 {
		t.Errorf("written outside OUT: %v", ents)
	}
	if _, err := os.Stat(filepath.Join(filepath.Dir(out), "up.csv")); err == nil {
		t.Error("an output climbed out of OUT")
	}
}
