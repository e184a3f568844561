package calib

import (
	"context"
	"fmt"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// TestInspectSweepCase rebuilds one case of the scale sweep, logs the grid
// search step by step and draws the picture and the rectified page and ink
// map to /tmp/cal/ (TRACELIFT_CALIB_CASE=photo:3; not run otherwise).
func TestInspectSweepCase(t *testing.T) {
	spec := os.Getenv("TRACELIFT_CALIB_CASE")
	if spec == "" {
		t.Skip("set TRACELIFT_CALIB_CASE=condition:index to inspect one sweep case")
	}
	cond, idx, ok := strings.Cut(spec, ":")
	i, err := strconv.Atoi(idx)
	if !ok || err != nil || i < 0 {
		t.Fatalf("TRACELIFT_CALIB_CASE=%q: want condition:index", spec)
	}
	rc := renderCase(t, cond, i, 20260101)
	dbgGrid = func(f string, a ...any) { t.Logf(f, a...) }
	defer func() { dbgGrid = nil }()
	t.Logf("style: grid %d colour %v dpi %v gain %v speed %v paper %v×%v; truth %+v", rc.style.Grid, rc.style.GridColor, rc.style.DPI,
		rc.style.GainMMPerMV, rc.style.SpeedMMPerS, rc.style.PaperWMM, rc.style.PaperHMM, rc.p.Truth.PxPerMMX)
	res, err := Detect(context.Background(), &Page{Image: rc.p.Image}, Options{})
	dir := "/tmp/cal"
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	save := func(name string, im image.Image) {
		f, err := os.Create(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		defer f.Close()
		if err := png.Encode(f, im); err != nil {
			t.Fatal(err)
		}
	}
	stem := fmt.Sprintf("%s-%d", cond, i)
	save(stem+"-src.png", rc.p.Image)
	if err != nil {
		t.Logf("Detect: %v", err)
		return
	}
	tx, ty, trot := truthAt(rc.p.Truth, res.ScaleAt[0], res.ScaleAt[1])
	t.Logf("found %.4f×%.4f rot %.3f source %s gain %v speed %v turned %d; truth %.4f×%.4f rot %.3f gain %v; warnings %q",
		res.PxPerMMX, res.PxPerMMY, res.RotationDeg, res.Source, res.GainMMPerMV, res.SpeedMMPerS, res.Turned, tx, ty, trot, rc.p.Truth.GainMMPerMV, res.Warnings)
	for _, p := range res.Pulses {
		t.Logf("pulse %+v", p)
	}
	save(stem+"-rect.png", res.Rectified)
	save(stem+"-ink.png", res.Ink)
	var hist [256]int
	for _, v := range res.Ink.Pix {
		hist[v]++
	}
	var sb strings.Builder
	acc := 0
	for v := 255; v >= 16; v-- {
		acc += hist[v]
		if v%16 == 0 {
			fmt.Fprintf(&sb, "≥%d: %.4f ", v, float64(acc)/float64(len(res.Ink.Pix)))
		}
	}
	t.Logf("ink levels: %s", sb.String())
	if v := os.Getenv("TRACELIFT_CALIB_DUMP"); v != "" {
		var x0, y0, x1, y1 int
		fmt.Sscanf(v, "%d,%d,%d,%d", &x0, &y0, &x1, &y1)
		for y := y0; y <= y1; y++ {
			var sb strings.Builder
			for x := x0; x <= x1; x++ {
				fmt.Fprintf(&sb, "%4d", res.Ink.Pix[y*res.Ink.Stride+x])
			}
			t.Logf("%4d %s", y, sb.String())
		}
	}
}
