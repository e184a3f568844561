package record

import (
	"fmt"
	"strings"
)

// Layout names an arrangement of leads on a printed page: rows of panels
// side by side in time, and rhythm strips across the whole page below
// them. Every package spells the layouts with these values.
type Layout string

// The layouts.
const (
	Layout3x4   Layout = "3x4"   // 3 rows × 4 columns of 2.5 s, no rhythm strip
	Layout3x4R1 Layout = "3x4+1" // 3 × 4 and one rhythm strip (lead II)
	Layout3x4R3 Layout = "3x4+3" // 3 × 4 and three rhythm strips (II, V1, V5)
	Layout6x2   Layout = "6x2"   // limb leads left, precordial leads right, 6 rows
	Layout12x1  Layout = "12x1"  // every lead across the page, 12 rows
	Layout1x1   Layout = "1x1"   // one strip
)

// Layouts lists every layout, in the order a list of choices shows them.
var Layouts = []Layout{Layout3x4, Layout3x4R1, Layout3x4R3, Layout6x2, Layout12x1, Layout1x1}

// layoutShape is the rows (rhythm strips included) and columns of panels
// each layout draws.
var layoutShape = map[Layout][2]int{
	Layout3x4: {3, 4}, Layout3x4R1: {4, 4}, Layout3x4R3: {6, 4},
	Layout6x2: {6, 2}, Layout12x1: {12, 1}, Layout1x1: {1, 1},
}

// Known reports whether l is one of Layouts.
func (l Layout) Known() bool { _, ok := layoutShape[l]; return ok }

// Rows is the number of rows of traces the layout draws, rhythm strips
// included; 0 for an unknown layout.
func (l Layout) Rows() int { return layoutShape[l][0] }

// Cols is the number of columns of panels; 0 for an unknown layout.
func (l Layout) Cols() int { return layoutShape[l][1] }

// LayoutNames joins layouts for a message or a help text:
// "3x4, 3x4+1, 3x4+3, 6x2, 12x1, 1x1".
func LayoutNames(ls []Layout) string {
	s := make([]string, len(ls))
	for i, l := range ls {
		s[i] = string(l)
	}
	return strings.Join(s, ", ")
}

// ParseLayout reads a layout's name; "" is an error (the callers that
// accept "found automatically" test for it first).
func ParseLayout(s string) (Layout, error) {
	if l := Layout(s); l.Known() {
		return l, nil
	}
	return "", fmt.Errorf("record: unknown layout %q (choose from %s)", s, LayoutNames(Layouts))
}
