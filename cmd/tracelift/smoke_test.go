package main

import (
	"bytes"
	"context"
	"errors"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"tracelift/gui/model"
	"tracelift/record"
	"tracelift/samples"
)

// TestWindowSmoke builds the app, starts it on the demo under a virtual X
// display (xvfb-run, installed by make test), takes a screenshot, and
// checks that the picture is not blank and that the app quits cleanly by
// itself. It is skipped where xvfb-run is missing and in -short runs.
func TestWindowSmoke(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the app")
	}
	xvfb, err := exec.LookPath("xvfb-run")
	if err != nil {
		t.Skip("xvfb-run not installed")
	}
	dir := t.TempDir()
	bin := filepath.Join(dir, "tracelift")
	build := exec.Command("go", "build", "-o", bin, ".")
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("build: %v\n%s", err, out)
	}
	shot := filepath.Join(dir, "window.png")
	ctx, cancel := context.WithTimeout(context.Background(), 120*time.Second)
	defer cancel()
	out, err := underDisplay(func() *exec.Cmd {
		cmd := exec.CommandContext(ctx, xvfb, "-a", "-s", "-screen 0 1400x900x24", bin, "--screenshot", shot, "--quit-after", "60s")
		cmd.Env = append(os.Environ(), "LANG=en_US.UTF-8", "HOME="+dir, "XDG_CONFIG_HOME="+filepath.Join(dir, "config"))
		return cmd
	})
	if ctx.Err() != nil {
		t.Fatalf("the app did not quit in time\n%s", out)
	}
	if err != nil {
		t.Fatalf("the app failed: %v\n%s", err, out)
	}
	f, err := os.Open(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v\n%s", err, out)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	if v := variance(img); v < 100 {
		t.Fatalf("screenshot looks blank: grey variance %.1f", v)
	}
	if b := img.Bounds(); b.Dx() < 600 || b.Dy() < 400 {
		t.Fatalf("window is %v", b)
	}
	if os.Getenv("TRACELIFT_KEEP_SHOT") != "" {
		data, _ := os.ReadFile(shot)
		os.WriteFile(os.Getenv("TRACELIFT_KEEP_SHOT"), data, 0o644)
	}
}

// variance of the grey level (0..255) over the picture.
func variance(img image.Image) float64 {
	b := img.Bounds()
	var s, s2, n float64
	for y := b.Min.Y; y < b.Max.Y; y += 2 {
		for x := b.Min.X; x < b.Max.X; x += 2 {
			r, g, bl, _ := img.At(x, y).RGBA()
			v := (0.299*float64(r) + 0.587*float64(g) + 0.114*float64(bl)) / 257
			s += v
			s2 += v * v
			n++
		}
	}
	m := s / n
	return s2/n - m*m
}

// TestWindowUndoKeys presses the undo and redo keys on the real window
// (xdotool under Xvfb) and watches the project file the app keeps beside
// the image: the app opens the demo printout with two saved corrections,
// Ctrl+Z leaves one, Ctrl+Shift+Z brings the second back, and Ctrl+Z then
// Ctrl+Y do the same. Skipped with -short or without xvfb-run and xdotool.
func TestWindowUndoKeys(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the app")
	}
	xvfb, err := exec.LookPath("xvfb-run")
	if err != nil {
		t.Skip("xvfb-run not installed")
	}
	if _, err := exec.LookPath("xdotool"); err != nil {
		t.Skip("xdotool not installed")
	}
	dir := t.TempDir()
	bin := filepath.Join(dir, "tracelift")
	if out, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		t.Fatalf("build: %v\n%s", err, out)
	}
	demo := samples.DefaultDemo()
	img := filepath.Join(dir, "page.png")
	if err := os.WriteFile(img, demo.Data, 0o644); err != nil {
		t.Fatal(err)
	}
	sha, err := model.FileSHA256(img)
	if err != nil {
		t.Fatal(err)
	}
	proj := model.ProjectPath(img)
	if err := model.SaveProjectFile(proj, &model.Project{Version: model.ProjectVersion, ImageSHA256: sha,
		Corrections: []record.Correction{
			{Kind: record.CorrBaseline, Lead: "II", OffsetMV: 0.1},
			{Kind: record.CorrBaseline, Lead: "V1", OffsetMV: -0.1},
		}}); err != nil {
		t.Fatal(err)
	}
	// A script inside the virtual display: start the app, wait for its
	// window to show the page, press the keys, give each time to land.
	script := filepath.Join(dir, "keys.sh")
	counts := filepath.Join(dir, "counts.txt")
	os.WriteFile(script, []byte(`#!/bin/sh
"$1" --quit-after 90s "$2" &
pid=$!
for i in $(seq 1 120); do
  id=$(xdotool search --name "page[.]png$" 2>/dev/null | tail -1)
  [ -n "$id" ] && break
  sleep 0.5
done
[ -z "$id" ] && { echo "no window"; kill $pid; exit 1; }
sleep 2
xdotool windowfocus --sync $id 2>/dev/null || true
count() { grep -o '"kind"' "$2.tracelift.json" | wc -l >> "$3"; }
for k in ctrl+z ctrl+shift+z ctrl+z ctrl+y; do
  xdotool key --clearmodifiers $k
  sleep 1.5
  count "$1" "$2" "$3"
done
kill $pid
wait $pid 2>/dev/null
exit 0
`), 0o755)
	ctx, cancel := context.WithTimeout(context.Background(), 150*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, xvfb, "-a", "-s", "-screen 0 1366x768x24", "sh", script, bin, img, counts)
	cmd.Env = append(os.Environ(), "LANG=en_US.UTF-8", "HOME="+dir, "XDG_CONFIG_HOME="+filepath.Join(dir, "config"))
	out, err := cmd.CombinedOutput()
	if err != nil && !xvfbCleanupFailed(err, out) { // the script's counts are written either way
		t.Fatalf("%v\n%s", err, out)
	}
	got, _ := os.ReadFile(counts)
	if want := "1\n2\n1\n2\n"; strings.Join(strings.Fields(string(got)), "\n")+"\n" != want {
		t.Fatalf("corrections saved after Ctrl+Z, Ctrl+Shift+Z, Ctrl+Z, Ctrl+Y: %q, want %q\n%s", got, want, out)
	}
}

// TestWindowCompare starts the app under Xvfb on the demo with
// --compare-with the open PTB record s0010_re (PTB Diagnostic ECG
// Database, PhysioNet; ../../../shared/data): it exits 0 only once the
// comparison window is shown, and its screenshot is not blank and fits
// a 1366×768 screen. With a text file as the earlier tracing it exits 3
// (the comparison failed) instead of hanging or crashing.
func TestWindowCompare(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the app")
	}
	xvfb, err := exec.LookPath("xvfb-run")
	if err != nil {
		t.Skip("xvfb-run not installed")
	}
	dir := t.TempDir()
	bin := filepath.Join(dir, "tracelift")
	if out, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		t.Fatalf("build: %v\n%s", err, out)
	}
	hea, err := filepath.Abs("../../../shared/data/ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	notes := filepath.Join(dir, "notes.txt")
	if err := os.WriteFile(notes, []byte("hello"), 0o644); err != nil {
		t.Fatal(err)
	}
	run := func(earlier, shot string) (int, string) {
		ctx, cancel := context.WithTimeout(context.Background(), 120*time.Second)
		defer cancel()
		out, err := underDisplay(func() *exec.Cmd {
			cmd := exec.CommandContext(ctx, xvfb, "-a", "-s", "-screen 0 1366x768x24", bin, "--compare-with", earlier, "--screenshot", shot, "--quit-after", "60s")
			cmd.Env = append(os.Environ(), "LANG=en_US.UTF-8", "HOME="+dir, "XDG_CONFIG_HOME="+filepath.Join(dir, "config"), "TRACELIFT_NO_VIEWER=1")
			return cmd
		})
		if ctx.Err() != nil {
			t.Fatalf("the app did not quit in time\n%s", out)
		}
		if ee, ok := err.(*exec.ExitError); ok {
			return ee.ExitCode(), string(out)
		}
		if err != nil {
			t.Fatal(err)
		}
		return 0, string(out)
	}
	shot := filepath.Join(dir, "comparison.png")
	if code, out := run(hea, shot); code != 0 {
		t.Fatalf("exit %d with the PTB record as the earlier tracing\n%s", code, out)
	}
	f, err := os.Open(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v", err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	if v := variance(img); v < 100 {
		t.Errorf("screenshot looks blank: grey variance %.1f", v)
	}
	if b := img.Bounds(); b.Dx() < 600 || b.Dy() < 400 || b.Dx() > 1366 || b.Dy() > 768 {
		t.Errorf("comparison window is %v", b)
	}
	if os.Getenv("TRACELIFT_KEEP_SHOT") != "" {
		data, _ := os.ReadFile(shot)
		os.WriteFile(os.Getenv("TRACELIFT_KEEP_SHOT")+".compare.png", data, 0o644)
	}
	if code, out := run(notes, filepath.Join(dir, "failed.png")); code != 3 {
		t.Errorf("exit %d with a text file as the earlier tracing, want 3\n%s", code, out)
	}
}

// underDisplay runs the command newCmd makes (the app under xvfb-run) and
// returns its output, running it once more when xvfb-run itself failed
// after the app ended (xvfbCleanupFailed), which loses the app's exit
// status.
func underDisplay(newCmd func() *exec.Cmd) ([]byte, error) {
	out, err := newCmd().CombinedOutput()
	if xvfbCleanupFailed(err, out) {
		out, err = newCmd().CombinedOutput()
	}
	return out, err
}

// xvfbCleanupFailed reports that xvfb-run could not remove its temporary
// directory once the program under it had ended: its own exit status 5,
// seen now and then under load, which says nothing of the program.
func xvfbCleanupFailed(err error, out []byte) bool {
	var ee *exec.ExitError
	return errors.As(err, &ee) && ee.ExitCode() == 5 && bytes.Contains(out, []byte("problem while cleaning up temporary directory"))
}
