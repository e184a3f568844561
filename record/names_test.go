package record

import (
	"math"
	"strconv"
	"strings"
	"testing"
)

// Each multi-lead layout shows the twelve standard leads once in its
// grid, and its rhythm strips (the number after "+") below it: rows
// without the strips × columns = 12 (common practice: the name is the
// grid, rows × columns, of a 12-lead printout).
func TestLayoutShapes(t *testing.T) {
	t.Parallel()
	for _, l := range Layouts {
		if !l.Known() {
			t.Fatalf("%s is listed but unknown", l)
		}
		if l == Layout1x1 {
			if l.Rows() != 1 || l.Cols() != 1 {
				t.Errorf("1x1 draws %d × %d", l.Rows(), l.Cols())
			}
			continue
		}
		grid, plus, _ := strings.Cut(string(l), "+")
		strips := 0
		if plus != "" {
			strips, _ = strconv.Atoi(plus)
		}
		r, c, _ := strings.Cut(grid, "x")
		nr, _ := strconv.Atoi(r)
		nc, _ := strconv.Atoi(c)
		if l.Rows() != nr+strips || l.Cols() != nc || nr*nc != 12 {
			t.Errorf("%s: rows %d, cols %d (the name says %d+%d × %d)", l, l.Rows(), l.Cols(), nr, strips, nc)
		}
	}
	if Layout("4x3").Known() || Layout("").Rows() != 0 {
		t.Error("an unknown layout is known")
	}
	if _, err := ParseLayout("4x3"); err == nil || !strings.Contains(err.Error(), "3x4, 3x4+1, 3x4+3, 6x2, 12x1, 1x1") {
		t.Errorf("ParseLayout(4x3): %v", err)
	}
	if l, err := ParseLayout("6x2"); err != nil || l != Layout6x2 {
		t.Errorf("ParseLayout(6x2) = %q, %v", l, err)
	}
}

// Unmeasured values print as the one mark; measured ones with the format.
func TestFormatNum(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		v    float64
		want string
	}{{math.NaN(), Missing}, {math.Inf(1), Missing}, {math.Inf(-1), Missing}, {-30.4, "-30°"}, {72, "72°"}} {
		if got := FormatNum("%.0f°", c.v); got != c.want {
			t.Errorf("FormatNum(%v) = %q, want %q", c.v, got, c.want)
		}
	}
}
