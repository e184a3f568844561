package digitize

import (
	"math"
	"sort"

	"tracelift/record"
)

// rowInfo is one row of traces found on the page.
type rowInfo struct {
	base   float64 // baseline (the row's densest ink level), px
	x0, x1 int     // the trace's first and last inked column, excluding any pulse
}

// findRows finds the rows of traces from the horizontal ink profile: the
// isoelectric level of a trace is the densest line of ink in its row.
// Candidates whose ink does not run a long way across the page (header
// text, lead labels) are dropped.
func findRows(g *gray, pxPerMM, gain float64) []rowInfo {
	prof := make([]float64, g.h)
	for y := 0; y < g.h; y++ {
		s := 0
		for _, v := range g.pix[y*g.w : (y+1)*g.w] {
			s += int(v)
		}
		prof[y] = float64(s)
	}
	prof = gaussSmooth(prof, 1.0*pxPerMM)
	mx := 0.0
	for _, v := range prof {
		mx = math.Max(mx, v)
	}
	if mx == 0 {
		return nil
	}
	win := int(4 * pxPerMM) // rows are at least ~14 mm apart on any layout we read
	var cands []int
	for y := 1; y < g.h-1; y++ {
		if prof[y] < 0.12*mx {
			continue
		}
		ok := true
		for d := -win; d <= win && ok; d++ {
			j := y + d
			if j < 0 || j >= g.h || d == 0 {
				continue
			}
			if prof[j] > prof[y] || (prof[j] == prof[y] && j < y) {
				ok = false
			}
		}
		if ok {
			cands = append(cands, y)
		}
	}
	var rows []rowInfo
	var faint []int // dense enough for a row, but its ink broken up
	longest := 0
	type ext struct{ x0, x1, run int }
	exts := make([]ext, len(cands))
	// The row's ink is looked for within 6 mm of its level. At a larger
	// gain the waves leave that band for longer (a T wave of −0.6 mV
	// reaches 12 mm down at 20 mm/mV); a candidate as dense as a row's
	// baseline is then given a band that grows with the gain, which a
	// weak candidate between rows (waves of the rows either side) is not.
	span := func(y int, half float64) ext {
		// The profile's peak of a row whose two halves stand at different
		// levels (the columns of a 6x2 page) may sit at one half's level:
		// the span is taken at the best of a few levels around it.
		var best ext
		for _, d := range []float64{0, -1.5, 1.5} {
			yy := y + int(d*pxPerMM)
			x0, x1, run := inkSpan(g, yy-int(half*pxPerMM), yy+int(half*pxPerMM), pxPerMM)
			if run > best.run {
				best = ext{x0, x1, run}
			}
		}
		return best
	}
	for i, y := range cands {
		exts[i] = span(y, 6)
		longest = max(longest, exts[i].run)
	}
	if wide := 6 * gain / 10; wide > 6 {
		for i, y := range cands {
			if exts[i].run < int(0.55*float64(longest)) && prof[y] >= 0.5*mx {
				if e := span(y, wide); e.run > exts[i].run {
					exts[i] = e
					longest = max(longest, e.run)
				}
			}
		}
	}
	for i, y := range cands {
		if exts[i].run < int(0.55*float64(longest)) || exts[i].run < int(20*pxPerMM) {
			if exts[i].run >= int(20*pxPerMM) && prof[y] >= 0.25*mx {
				faint = append(faint, y)
			}
			continue
		}
		rows = append(rows, rowInfo{base: float64(y) + 0.5, x0: exts[i].x0, x1: exts[i].x1})
	}
	// Two candidates closer than 0.45 of the median spacing are one row.
	if len(rows) > 2 {
		var gaps []float64
		for i := 1; i < len(rows); i++ {
			gaps = append(gaps, rows[i].base-rows[i-1].base)
		}
		sort.Float64s(gaps)
		med := gaps[len(gaps)/2]
		var keep []rowInfo
		for _, r := range rows {
			if n := len(keep); n > 0 && r.base-keep[n-1].base < 0.45*med {
				if prof[int(r.base)] > prof[int(keep[n-1].base)] {
					keep[n-1] = r
				}
				continue
			}
			keep = append(keep, r)
		}
		rows = keep
	}
	return addFaintRows(rows, faint)
}

// addFaintRows puts back, into rows whose count fits no layout, the
// candidates dropped for broken ink (a nearly flat trace on a fax, its
// thin line broken by the dither) that stand one row spacing beyond the
// first or last row or midway in a double gap, when that gives a count
// some layout draws. A row put back spans what the others span.
func addFaintRows(rows []rowInfo, faint []int) []rowInfo {
	if len(rows) < 3 || validRowCount(len(rows)) || len(faint) == 0 {
		return rows
	}
	var gaps, x0s, x1s []float64
	for i := range rows {
		if i > 0 {
			gaps = append(gaps, rows[i].base-rows[i-1].base)
		}
		x0s = append(x0s, float64(rows[i].x0))
		x1s = append(x1s, float64(rows[i].x1))
	}
	med := median(gaps)
	x0, x1 := int(median(x0s)), int(median(x1s))
	fits := func(d float64) bool { return math.Abs(d-med) <= 0.15*med }
	out := append([]rowInfo(nil), rows...)
	for _, y := range faint {
		b := float64(y) + 0.5
		first, last := out[0].base, out[len(out)-1].base
		ok := fits(first-b) || fits(b-last)
		for i := 1; i < len(out) && !ok; i++ {
			if fits(b-out[i-1].base) && fits(out[i].base-b) {
				ok = true
			}
		}
		if !ok {
			continue
		}
		out = append(out, rowInfo{base: b, x0: x0, x1: x1})
		sort.Slice(out, func(i, j int) bool { return out[i].base < out[j].base })
		if validRowCount(len(out)) {
			return out
		}
	}
	return rows
}

// inkSpan looks at the rows [ya, yb) and returns the first and last
// column of the longest stretch of columns holding ink (gaps up to 3 mm
// are bridged) that is not a calibration pulse, and the stretch's length.
func inkSpan(g *gray, ya, yb int, pxPerMM float64) (x0, x1, run int) {
	ya, yb = max(ya, 0), min(yb, g.h)
	has := make([]bool, g.w)
	for y := ya; y < yb; y++ {
		row := g.pix[y*g.w : (y+1)*g.w]
		for x, v := range row {
			if v >= 64 {
				has[x] = true
			}
		}
	}
	gap := int(3 * pxPerMM)
	bestA, bestB := -1, -1
	a, last := -1, -1
	flush := func() {
		if a >= 0 && last-a > bestB-bestA {
			bestA, bestB = a, last
		}
	}
	for x, h := range has {
		if !h {
			continue
		}
		if a < 0 || x-last > gap {
			flush()
			a = x
		}
		last = x
	}
	flush()
	if bestA < 0 {
		return 0, 0, 0
	}
	return bestA, bestB, bestB - bestA + 1
}

// gaussSmooth convolves v with a Gaussian of standard deviation sigma.
// OpenCV's GaussianBlur is faster (taskset -c 0 go test -bench
// GaussSmooth -run '^$' ./digitize/, 2480 values, σ = 11.8: 53 µs against
// 150 µs here, the same output to 1e-9), but a tenth of a millisecond a
// page does not pay for the bench's moves by the last bits (see calib's
// patchPower).
func gaussSmooth(v []float64, sigma float64) []float64 {
	r := int(math.Ceil(3 * sigma))
	if r < 1 {
		return append([]float64(nil), v...)
	}
	k := make([]float64, 2*r+1)
	s := 0.0
	for i := range k {
		d := float64(i - r)
		k[i] = math.Exp(-d * d / (2 * sigma * sigma))
		s += k[i]
	}
	out := make([]float64, len(v))
	for i := range v {
		acc := 0.0
		for j, kw := range k {
			acc += kw * v[clampI(i+j-r, 0, len(v)-1)]
		}
		out[i] = acc / s
	}
	return out
}

// hypothesis is one reading of the page: a layout and a lead order.
type hypothesis struct {
	layout  string
	cabrera bool
}

// layoutRows is the number of rows a layout draws (0 for an unknown one).
func layoutRows(l string) int { return record.Layout(l).Rows() }

// layoutCols is the number of columns of panels.
func layoutCols(l string) int { return record.Layout(l).Cols() }

// candidates lists the readings to try for n rows.
func candidates(n int, opt Options) []hypothesis {
	var lays []string
	if opt.Layout != "" {
		lays = []string{opt.Layout}
	} else {
		for _, l := range record.Layouts {
			if l.Rows() == n {
				lays = append(lays, string(l))
			}
		}
		sort.Strings(lays)
	}
	var out []hypothesis
	for _, l := range lays {
		switch opt.LeadOrder {
		case "standard":
			out = append(out, hypothesis{l, false})
		case "cabrera":
			out = append(out, hypothesis{l, true})
		default:
			out = append(out, hypothesis{l, false})
			if l != "1x1" {
				out = append(out, hypothesis{l, true})
			}
		}
	}
	return out
}

// leadGrid returns the printed lead names of the panels of a layout in
// reading order (row by row, left to right; rhythm strips last, named by
// default II, V1, V5).
func leadGrid(h hypothesis) (names []string, rows, cols []int, rhythm []bool) {
	limb := []string{"I", "II", "III", "aVR", "aVL", "aVF"}
	if h.cabrera {
		limb = []string{"aVL", "I", "-aVR", "II", "aVF", "III"}
	}
	all := append(append([]string{}, limb...), "V1", "V2", "V3", "V4", "V5", "V6")
	add := func(n string, r, c int, rh bool) {
		names = append(names, n)
		rows = append(rows, r)
		cols = append(cols, c)
		rhythm = append(rhythm, rh)
	}
	switch h.layout {
	case "3x4", "3x4+1", "3x4+3":
		for r := 0; r < 3; r++ {
			for c := 0; c < 4; c++ {
				add(all[3*c+r], r, c, false)
			}
		}
		strips := map[string][]string{"3x4+1": {"II"}, "3x4+3": {"II", "V1", "V5"}}[h.layout]
		for i, s := range strips {
			add(s, 3+i, 0, true)
		}
	case "6x2":
		for r := 0; r < 6; r++ {
			for c := 0; c < 2; c++ {
				add(all[6*c+r], r, c, false)
			}
		}
	case "12x1":
		for r, n := range all {
			add(n, r, 0, false)
		}
	case "1x1":
		add("II", 0, 0, true)
	}
	return
}

// validRowCount reports whether some layout draws n rows.
func validRowCount(n int) bool {
	for _, l := range record.Layouts {
		if l.Rows() == n {
			return true
		}
	}
	return false
}

// trimRows drops rows found at the top or bottom of the page that break
// the rows' regular spacing (a header or footer line of text, a fold)
// while their count fits no layout. Trace rows of every layout we read
// are evenly spaced; a text line sits at its own distance.
func trimRows(rows []rowInfo) []rowInfo {
	for len(rows) > 3 && !validRowCount(len(rows)) {
		var gaps []float64
		for i := 1; i < len(rows); i++ {
			gaps = append(gaps, rows[i].base-rows[i-1].base)
		}
		s := append([]float64(nil), gaps...)
		sort.Float64s(s)
		med := s[len(s)/2]
		dFirst := math.Abs(gaps[0]-med) / med
		dLast := math.Abs(gaps[len(gaps)-1]-med) / med
		// 15 %: rows drawn on a grid keep their spacing to a fraction of
		// a millimetre; a text line rarely lands that close to it.
		switch {
		case dFirst >= dLast && dFirst > 0.15:
			rows = rows[1:]
		case dLast > dFirst && dLast > 0.15:
			rows = rows[:len(rows)-1]
		default:
			return rows
		}
	}
	return rows
}

// colMax returns the strongest working-map ink in column x over rows
// [ya, yb).
func colMax(g *gray, x, ya, yb int) int {
	m := 0
	for y := ya; y < yb; y++ {
		m = max(m, int(g.pix[y*g.w+x]))
	}
	return m
}

// medianColMax returns a row's usual ink strength: the median, over every
// third column of [x0, x1), of the column maximum over rows [ya, yb);
// −1 when there are no columns.
func medianColMax(g *gray, x0, x1, ya, yb int) int {
	var cm []int
	for x := x0; x < x1; x += 3 {
		cm = append(cm, colMax(g, x, ya, yb))
	}
	if len(cm) == 0 {
		return -1
	}
	sort.Ints(cm)
	return cm[len(cm)/2]
}

// inkedShare is the fraction of the columns [x0, x1) that hold ink (on
// or more) somewhere in rows [ya, yb); ok is false when there are none.
func inkedShare(g *gray, x0, x1, ya, yb, on int) (share float64, ok bool) {
	x0, x1 = max(0, x0), min(g.w, x1)
	if x1 <= x0 {
		return 0, false
	}
	inked := 0
	for x := x0; x < x1; x++ {
		if colMax(g, x, ya, yb) >= on {
			inked++
		}
	}
	return float64(inked) / float64(x1-x0), true
}

// rowContinuity is the fraction of the columns of row r's extent that
// hold ink within 0.45 of the row pitch of its baseline. A trace crosses
// every column; a line of text leaves gaps between its words and
// letters.
func rowContinuity(g *gray, r rowInfo, pitch float64) float64 {
	ya, yb := max(0, int(r.base-0.45*pitch)), min(g.h, int(r.base+0.45*pitch)+1)
	c, _ := inkedShare(g, r.x0, r.x1, ya, yb, inkOn)
	return c
}

// dropTextRows removes, from rows whose count fits no layout, the rows
// that are broken like a line of text (under 90 % of their columns
// inked), most broken first, when that leaves a count some layout
// draws; otherwise rows is returned as it is.
func dropTextRows(g *gray, rows []rowInfo, pitch float64) []rowInfo {
	if validRowCount(len(rows)) {
		return rows
	}
	type scored struct {
		i int
		c float64
	}
	var broken []scored
	for i, r := range rows {
		if c := rowContinuity(g, r, pitch); c < 0.9 {
			broken = append(broken, scored{i, c})
		}
	}
	sort.Slice(broken, func(a, b int) bool { return broken[a].c < broken[b].c })
	drop := make(map[int]bool)
	for _, b := range broken {
		drop[b.i] = true
		if validRowCount(len(rows) - len(drop)) {
			var out []rowInfo
			for i, r := range rows {
				if !drop[i] {
					out = append(out, r)
				}
			}
			return out
		}
	}
	return rows
}

// Text against traces. A trace is the graph of a function drawn with one
// pen: along the paper it runs as one line, unbroken over millimetres (a
// fax's drop-outs break it every 5–10 mm at worst), and a column crosses
// it once. A line of printed text is a row of letters: its strokes are a
// few tenths of a millimetre to two millimetres wide, and a column through
// an e, an o or an s crosses two or three strokes. traceScore weighs the
// two: the share of the row's inked columns covered by a line at least
// 3 mm long (two pixels of step allowed per column, for a noisy pen) less
// half the share of inked columns crossed more than once (crossings closer
// than 0.15 mm count as one: a ragged line). See traceRowMin for what it
// gives.
func traceScore(g *gray, r rowInfo, pitch, pxPerMM float64) float64 {
	ya, yb := max(0, int(r.base-0.45*pitch)), min(g.h, int(r.base+0.45*pitch)+1)
	x0, x1 := max(0, r.x0), min(g.w, r.x1)
	if x1-x0 < 8 || yb-ya < 3 {
		return 0
	}
	w, hb := x1-x0, yb-ya
	on := func(x, y int) bool { return g.pix[(ya+y)*g.w+x] >= inkOn }
	const step = 2
	// run[y] is the length of the longest line of ink ending at (x, y)
	// that moves at most step pixels up or down per column.
	run, prev := make([]int, hb), make([]int, hb)
	covered := make([]int, w+1) // difference array of covered columns
	minLen := max(4, int(3*pxPerMM))
	gap := max(1, int(math.Round(0.15*pxPerMM)))
	inked, multi := 0, 0
	for x := x0; x < x1; x++ {
		runs, last := 0, -gap-2
		for y := 0; y < hb; y++ {
			if !on(x, y) {
				run[y] = 0
				continue
			}
			if y-last > gap+1 {
				runs++
			}
			last = y
			best := 0
			for d := -step; d <= step; d++ {
				if yy := y + d; yy >= 0 && yy < hb {
					best = max(best, prev[yy])
				}
			}
			run[y] = best + 1
			if run[y] == minLen {
				covered[x-x0-minLen+1]++
				covered[x-x0+1]--
			} else if run[y] > minLen {
				covered[x-x0]++
				covered[x-x0+1]--
			}
		}
		if runs > 0 {
			inked++
			if runs >= 2 {
				multi++
			}
		}
		run, prev = prev, run
	}
	if inked == 0 {
		return 0
	}
	// A covered column holds a pixel of the line that covers it, so it is
	// inked.
	c, long := 0, 0
	for x := 0; x < w; x++ {
		c += covered[x]
		if c > 0 {
			long++
		}
	}
	return float64(long)/float64(inked) - 0.5*float64(multi)/float64(inked)
}

// traceRowMin is the score a row must reach to count as a trace (see
// traceScore). Measured: the trace rows of bench pages of seed 1 (faxes
// with drop-outs, speckle and dashed grid lines, photocopies, photos, fax
// pages after a cover sheet) and of the six outside pages score 0.47 and
// up, most above 0.7 (the lowest: a noisy fax of PTB s0010_re at 200 dpi
// with no grid, 0.47–0.60, and a fax whose trace is a dotted hairline,
// read from its pulse and exempt); rows of printed text (6–16 pt, sans,
// serif and monospaced, with rules between the lines) and fax cover
// sheets score −0.5 to 0 in most fonts and 0.44–0.49 in a 16 pt serif,
// whose feet touch along the line. Pages of many lines of text also have
// more rows than any layout (maxLayoutRows).
const traceRowMin = 0.5

// maxLayoutRows is more rows than any layout prints (12x1 and a rhythm
// strip or three).
const maxLayoutRows = 16

// textOnly reports a page whose rows of ink are lines of text, not traces:
// fewer than a third of them (and none on a page of one or two rows) score
// as a trace.
func textOnly(g *gray, rows []rowInfo, pxPerMM float64) bool {
	pitch := rowPitch(rows, g, pxPerMM)
	traces := 0
	for _, r := range rows {
		if traceScore(g, r, pitch, pxPerMM) >= traceRowMin {
			traces++
		}
	}
	return 3*traces < len(rows) || traces == 0
}
