package main

import (
	"bytes"
	"math"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"tracelift/samples"
)

// truthAt reads the scale and direction off a page-to-image map made by
// hand: page px scaled by 1.5 and turned 30° counter-clockwise (y down, so
// the time axis points up and to the right) gives 1.5 × the clean px/mm on
// both axes and 30°, wherever it is asked; a bent page falls back to the
// global truth.
func TestTruthAt(t *testing.T) {
	a := 30 * math.Pi / 180
	c, s := 1.5*math.Cos(a), 1.5*math.Sin(a)
	tr := samples.Truth{CleanPxPerMM: 8, PxPerMMX: 1, PxPerMMY: 2, RotationDeg: 3,
		PageToImage: [9]float64{c, s, 40, -s, c, 900, 0, 0, 1}}
	for _, p := range [][2]float64{{100, 200}, {1500, 50}} {
		x, y, rot := truthAt(tr, p[0], p[1])
		if math.Abs(x-12) > 1e-9 || math.Abs(y-12) > 1e-9 || math.Abs(rot-30) > 1e-9 {
			t.Errorf("at %v: %.6f × %.6f px/mm, %.6f°, want 12 × 12, 30°", p, x, y, rot)
		}
	}
	tr.Bend = &samples.Bend{}
	if x, y, rot := truthAt(tr, 100, 200); x != 1 || y != 2 || rot != 3 {
		t.Errorf("bent page: %v %v %v, want the global truth 1 2 3", x, y, rot)
	}
}

// bench --calib-table on one clean 300-dpi page: calib finds the grid, and
// its px/mm error stays under 1 %, the p95 goal for scans (the
// same limit calib's TestScaleSweep holds its subset to).
func TestBenchCalibTable(t *testing.T) {
	if testing.Short() {
		t.Skip("renders and reads a page")
	}
	var out, errb bytes.Buffer
	args := []string{"bench", "--calib-table", "--cases", "1", "--dpi", "300", "--ptb", "", "--conditions", "clean"}
	if code := run(args, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	_, table, ok := strings.Cut(out.String(), "calib alone")
	if !ok {
		t.Fatalf("no calib table:\n%s", out.String())
	}
	m := regexp.MustCompile(`(?m)^clean\s+1\s+0\s+0\s+\S+%\s+\S+%\s+(\S+)%.*grid:1`).FindStringSubmatch(table)
	if m == nil {
		t.Fatalf("clean row not as expected:\n%s", table)
	}
	if v, err := strconv.ParseFloat(m[1], 64); err != nil || v > 1 {
		t.Errorf("worst px/mm error %s %%, want ≤ 1 %%", m[1])
	}
}
