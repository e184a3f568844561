package main

import (
	"context"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
	"time"
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
	cmd := exec.CommandContext(ctx, xvfb, "-a", "-s", "-screen 0 1400x900x24", bin, "--screenshot", shot, "--quit-after", "60s")
	cmd.Env = append(os.Environ(), "LANG=en_US.UTF-8", "HOME="+dir, "XDG_CONFIG_HOME="+filepath.Join(dir, "config"))
	out, err := cmd.CombinedOutput()
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
