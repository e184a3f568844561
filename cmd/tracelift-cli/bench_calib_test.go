package main

import (
	"bytes"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

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
