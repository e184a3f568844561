package digitize

import (
	"math"
	"sort"
)

// Reading the printed settings. A page without calibration pulses
// still states its paper speed and gain in its text ("25 mm/s",
// "10 mm/mV"; common practice on printed ECGs). Those two tokens are
// read from their glyphs' shapes alone, not matched against any font:
// the unit is found by its slash between letters ("mm/s" and "mm/mV"),
// and the number before it from a few features that tell the digits
// in question apart whatever the typeface (a 1 is one upright stroke,
// a 2 stands on a full bar, a 5 hangs from one, a 0 is upright on both
// sides).

// glyph is one connected piece of ink on the page, in raw ink pixels.
type glyph struct {
	x0, y0, x1, y1 int // box, inclusive
	pix            []bool
}

func (gl glyph) w() int { return gl.x1 - gl.x0 + 1 }
func (gl glyph) h() int { return gl.y1 - gl.y0 + 1 }

func (gl glyph) at(x, y int) bool { return gl.pix[(y-gl.y0)*gl.w()+x-gl.x0] }

// glyphs returns the connected pieces of raw ink (8-connected, ink at
// or above on) in rows [ya, yb) whose size could be text (at most 8 mm
// tall and wide) and that the region's edges do not cut.
func glyphs(g *gray, ya, yb int, pxPerMM float64, on uint8) []glyph {
	pix := g.raw
	if pix == nil {
		pix = g.pix
	}
	ya, yb = max(0, ya), min(g.h, yb)
	if yb-ya < 3 {
		return nil
	}
	seen := make([]bool, (yb-ya)*g.w)
	maxH, maxW := int(8*pxPerMM), int(8*pxPerMM)
	minH := max(4, int(1*pxPerMM))
	var out []glyph
	var stack []int
	var members []int
	for y := ya; y < yb; y++ {
		for x := 0; x < g.w; x++ {
			i := (y-ya)*g.w + x
			if seen[i] || pix[y*g.w+x] < on {
				continue
			}
			seen[i] = true
			stack = append(stack[:0], i)
			members = members[:0]
			x0, y0, x1, y1 := x, y, x, y
			big := false
			for len(stack) > 0 {
				j := stack[len(stack)-1]
				stack = stack[:len(stack)-1]
				members = append(members, j)
				cx, cy := j%g.w, ya+j/g.w
				x0, x1 = min(x0, cx), max(x1, cx)
				y0, y1 = min(y0, cy), max(y1, cy)
				if x1-x0 > maxW || y1-y0 > maxH {
					big = true
				}
				for dy := -1; dy <= 1; dy++ {
					for dx := -1; dx <= 1; dx++ {
						nx, ny := cx+dx, cy+dy
						if nx < 0 || nx >= g.w || ny < ya || ny >= yb {
							continue
						}
						k := (ny-ya)*g.w + nx
						if !seen[k] && pix[ny*g.w+nx] >= on {
							seen[k] = true
							stack = append(stack, k)
						}
					}
				}
			}
			// A piece cut by the region's edge (a wave reaching in from
			// the trace beyond it) is not text.
			cut := (y0 == ya && ya > 0) || (y1 == yb-1 && yb < g.h)
			if big || cut || y1-y0+1 < minH/3 {
				continue
			}
			gl := glyph{x0: x0, y0: y0, x1: x1, y1: y1}
			gl.pix = make([]bool, gl.w()*gl.h())
			for _, j := range members {
				cx, cy := j%g.w, ya+j/g.w
				gl.pix[(cy-y0)*gl.w()+cx-x0] = true
			}
			out = append(out, gl)
		}
	}
	return out
}

// textLines groups glyphs into lines (their vertical middles within
// half a glyph height of each other), each sorted left to right.
func textLines(gs []glyph) [][]glyph {
	sort.Slice(gs, func(a, b int) bool { return gs[a].y0+gs[a].y1 < gs[b].y0+gs[b].y1 })
	var lines [][]glyph
	for _, gl := range gs {
		mid := float64(gl.y0+gl.y1) / 2
		placed := false
		for i := range lines {
			l := lines[i]
			ref := l[len(l)-1]
			if math.Abs(mid-float64(ref.y0+ref.y1)/2) <= 0.5*float64(max(ref.h(), gl.h())) {
				lines[i] = append(lines[i], gl)
				placed = true
				break
			}
		}
		if !placed {
			lines = append(lines, []glyph{gl})
		}
	}
	for _, l := range lines {
		sort.Slice(l, func(a, b int) bool { return l[a].x0 < l[b].x0 })
	}
	return lines
}

// slash says whether the glyph is a rising diagonal stroke: its ink
// in the top third sits well right of its ink in the bottom third, and
// it is taller than wide.
func (gl glyph) slash() bool {
	if gl.h() < 6 || gl.w() > gl.h() {
		return false
	}
	mean := func(ya, yb int) float64 {
		var s, n float64
		for y := ya; y < yb; y++ {
			for x := gl.x0; x <= gl.x1; x++ {
				if gl.at(x, y) {
					s += float64(x)
					n++
				}
			}
		}
		if n == 0 {
			return math.NaN()
		}
		return s / n
	}
	t := gl.h() / 3
	top, bot := mean(gl.y0, gl.y0+t), mean(gl.y1-t+1, gl.y1+1)
	return top-bot >= 0.35*float64(gl.w()) && top-bot >= 2
}

// colRun returns the longest vertical run of ink in column x, as a
// fraction of the glyph's height.
func (gl glyph) colRun(x int) float64 {
	best, run := 0, 0
	for y := gl.y0; y <= gl.y1; y++ {
		if gl.at(x, y) {
			run++
			best = max(best, run)
		} else {
			run = 0
		}
	}
	return float64(best) / float64(gl.h())
}

// rowSpan returns the extent of ink in the band of rows [ya, yb) as a
// fraction of the glyph's width.
func (gl glyph) rowSpan(ya, yb int) float64 {
	lo, hi := gl.x1+1, gl.x0-1
	for y := ya; y < yb; y++ {
		for x := gl.x0; x <= gl.x1; x++ {
			if gl.at(x, y) {
				lo, hi = min(lo, x), max(hi, x)
			}
		}
	}
	if hi < lo {
		return 0
	}
	return float64(hi-lo+1) / float64(gl.w())
}

// rowCentre returns the mean x of the ink in the rows around the
// fraction f of the glyph's height, as a fraction of its width (NaN
// where there is none).
func (gl glyph) rowCentre(f float64) float64 {
	yc := gl.y0 + int(f*float64(gl.h()))
	d := max(0, gl.h()/20)
	var s, n float64
	for y := max(gl.y0, yc-d); y <= min(gl.y1, yc+d); y++ {
		for x := gl.x0; x <= gl.x1; x++ {
			if gl.at(x, y) {
				s += float64(x - gl.x0)
				n++
			}
		}
	}
	if n == 0 {
		return math.NaN()
	}
	return (s/n + 0.5) / float64(gl.w())
}

// digit tells the digits 0, 1, 2 and 5 apart (those that start the
// standard speeds and gains: 25, 50; 5, 10, 20), or returns −1: a 0 is
// upright on both sides, a 1 is one upright stroke (narrow, or in the
// middle with serifs), and a 2 and a 5 are told by which way their
// stroke moves down the glyph.
func (gl glyph) digit() int {
	w, h := gl.w(), gl.h()
	if h < 6 || w > h {
		return -1
	}
	// Upright strokes: the columns holding a run over 70 % of the height.
	var tall []int
	for x := gl.x0; x <= gl.x1; x++ {
		if gl.colRun(x) >= 0.7 {
			tall = append(tall, x)
		}
	}
	// A 2's stroke runs from the right at a third of the height down to
	// the left at two thirds (its arc, then its diagonal); a 5's from the
	// left (its upright) to the right (its bowl).
	drift := gl.rowCentre(0.7) - gl.rowCentre(0.33)
	switch {
	case len(tall) > 0 && tall[len(tall)-1]-tall[0] >= w/2:
		return 0 // upright on both sides
	case len(tall) > 0 && float64(w) < 0.45*float64(h):
		return 1
	case len(tall) > 0 && math.Abs(float64(tall[0]+tall[len(tall)-1])/2-float64(gl.x0+gl.x1)/2) <= 0.2*float64(w):
		return 1 // one upright stroke in the middle (a seriffed 1)
	case drift <= -0.15:
		return 2
	case drift >= 0.15:
		return 5
	}
	return -1
}

// mLike says whether a glyph could be a lower-case m: short (at most
// 80 % of the line's tallest glyph) and at least 3/5 as wide as tall (a
// condensed face's m is about 2/3).
func (gl glyph) mLike(lineH int) bool {
	return float64(gl.h()) <= 0.8*float64(lineH) && 5*gl.w() >= 3*gl.h()
}

// printedSettings reads "… mm/s" and "… mm/mV" from the page's text
// outside the rows [rows' first base − pitch/2, last base + pitch/2]
// and returns the speed and gain they state, 0 where none was read.
func printedSettings(g *gray, rows []rowInfo, pitch, pxPerMM float64) (speed, gain float64) {
	if len(rows) == 0 || !(pitch > 0) {
		return 0, 0
	}
	top := int(rows[0].base - 0.5*pitch)
	bot := int(rows[len(rows)-1].base + 0.5*pitch)
	var gs []glyph
	gs = append(gs, glyphs(g, 0, top, pxPerMM, 96)...)
	gs = append(gs, glyphs(g, bot, g.h, pxPerMM, 96)...)
	for _, line := range textLines(gs) {
		// The line's height: its tallest glyph but a slash (which
		// reaches below the others in many faces).
		lineH := 0
		for _, gl := range line {
			if !gl.slash() {
				lineH = max(lineH, gl.h())
			}
		}
		for i, gl := range line {
			if !gl.slash() || i < 2 || !line[i-1].mLike(lineH) || !line[i-2].mLike(lineH) {
				continue
			}
			// The number: the glyphs before "mm", digit-sized, the first
			// up to two glyph heights before it, the others close.
			var num []glyph
			for j := i - 3; j >= 0; j-- {
				d := line[j]
				gap := line[j+1].x0 - d.x1
				lim := lineH / 2
				if j == i-3 {
					lim = 2 * lineH
				}
				if gap > lim || float64(d.h()) < 0.8*float64(lineH) {
					break
				}
				num = append([]glyph{d}, num...)
			}
			if len(num) == 0 {
				continue
			}
			first := num[0].digit()
			// Gain when a letter pair (the "mV") follows the slash.
			// The V is a capital, near the line's height: a speck after
			// the "s" of "mm/s" is none.
			isGain := i+2 < len(line) && line[i+1].mLike(lineH) && line[i+2].x0-line[i+1].x1 < lineH/2 &&
				float64(line[i+2].h()) >= 0.7*float64(lineH)
			switch {
			case isGain && gain == 0:
				switch {
				case len(num) == 1 && first == 5:
					gain = 5
				case len(num) == 2 && first == 1:
					gain = 10
				case len(num) == 2 && first == 2:
					gain = 20
				}
			case !isGain && speed == 0:
				switch {
				case len(num) == 2 && first == 2:
					speed = 25
				case len(num) == 2 && first == 5:
					speed = 50
				}
			}
		}
	}
	return speed, gain
}

// Reading a single strip's lead name. A page holding one strip names
// its lead only in its label (common practice: the name printed above
// the trace's start); the names such a strip carries are read from the
// glyphs' shapes as the settings are: I, II and III are upright strokes
// alone, V1, V2 and V5 a V (two strokes meeting at the foot) and a
// digit.

// uprights counts the separate upright strokes of a glyph: groups of
// adjacent columns each holding a run over 70 % of its height.
func (gl glyph) uprights() int {
	n, in := 0, false
	for x := gl.x0; x <= gl.x1; x++ {
		tall := gl.colRun(x) >= 0.7
		if tall && !in {
			n++
		}
		in = tall
	}
	return n
}

// strokesOnly says whether nearly all of a glyph's ink (80 %) between
// its top and bottom sixths lies in or beside its upright strokes: an I
// with or without serifs, not a letter with a bowl or an arm.
func (gl glyph) strokesOnly() bool {
	tall := make([]bool, gl.w())
	for x := gl.x0; x <= gl.x1; x++ {
		tall[x-gl.x0] = gl.colRun(x) >= 0.7
	}
	// Serifs are the top and bottom rows' business; the middle holds
	// the strokes alone.
	var in, all int
	for y := gl.y0 + gl.h()/6; y <= gl.y1-gl.h()/6; y++ {
		for x := gl.x0; x <= gl.x1; x++ {
			if !gl.at(x, y) {
				continue
			}
			all++
			i := x - gl.x0
			if tall[i] || (i > 0 && tall[i-1]) || (i+1 < len(tall) && tall[i+1]) {
				in++
			}
		}
	}
	return all > 0 && 5*in >= 4*all
}

// vee says whether a glyph is a V: two runs of ink a fifth of the way
// down, one narrow run a tenth of the way up from its foot, and at most
// one upright stroke.
func (gl glyph) vee() bool {
	// A bold V's strokes meet in an upright run at its foot: one upright
	// is allowed, and the foot must be narrow (a seriffed II joined at
	// its serifs has a foot as wide as itself).
	if gl.h() < 6 || gl.uprights() > 1 {
		return false
	}
	runs := func(y int) int {
		n, in := 0, false
		for x := gl.x0; x <= gl.x1; x++ {
			if gl.at(x, y) && !in {
				n++
			}
			in = gl.at(x, y)
		}
		return n
	}
	top, bot := gl.y0+gl.h()/5, gl.y1-gl.h()/10
	return runs(top) == 2 && runs(bot) == 1 && gl.rowSpan(gl.y0, gl.y0+1) > 0.6 && gl.rowSpan(bot, bot+1) < 0.5
}

// stripLabel reads the lead name printed within 25 mm above a strip's
// start (baseline y base, ink starting at column x0): "I", "II", "III",
// "V1", "V2" or "V5", or "" when it reads none of them.
func stripLabel(g *gray, base float64, x0 int, pxPerMM float64) string {
	if name := readStripLabel(g, base, x0, pxPerMM); name != "" || g.raw == nil {
		return name
	}
	// A grid as dark as the text (a photocopy, a fax) joins the glyphs
	// into one piece in the raw ink; the working map has the lines taken
	// out.
	return readStripLabel(&gray{w: g.w, h: g.h, pix: g.pix}, base, x0, pxPerMM)
}

// readStripLabel looks for the name above the strip's start, then below
// it (clear of the trace's downward waves: from 1 mm below the baseline).
// A name in the margin before the strip is not read: a monospaced "III"
// there, its serifs touching, read as "I", and a wrong name is worse than
// none.
func readStripLabel(g *gray, base float64, x0 int, pxPerMM float64) string {
	b := func(mm float64) int { return int(base + mm*pxPerMM) }
	left, right := x0-int(8*pxPerMM), x0+int(30*pxPerMM)
	for _, w := range [][4]int{
		{b(-25), b(-1), left, right},
		{b(1), b(25), left, right},
	} {
		if name := readLabelIn(g, w[0], w[1], w[2], w[3], pxPerMM); name != "" {
			return name
		}
	}
	return ""
}

// readLabelIn reads a lead's name among the glyphs wholly within rows
// [ya, yb) and columns [xa, xb].
func readLabelIn(g *gray, ya, yb, xa, xb int, pxPerMM float64) string {
	var near []glyph
	for _, gl := range glyphs(g, ya, yb, pxPerMM, 96) {
		// A glyph the window cuts is no whole letter.
		if gl.x0 >= xa && gl.x1 <= xb && gl.y0 > max(0, ya) && gl.y1 < min(g.h, yb)-1 && float64(gl.h()) >= 1.2*pxPerMM {
			near = append(near, gl)
		}
	}
	for _, line := range textLines(near) {
		// The label: the first word of the line, its glyphs of a height.
		h := line[0].h()
		word := []glyph{line[0]}
		for _, gl := range line[1:] {
			if gl.x0-word[len(word)-1].x1 > h/2 || math.Abs(float64(gl.h()-h)) > 0.25*float64(h) {
				break
			}
			word = append(word, gl)
		}
		// A label stands alone: the next glyph on the line, if any, is
		// a word's gap away.
		if n := len(word); n < len(line) && line[n].x0-word[n-1].x1 <= h/2 {
			continue
		}
		switch {
		case word[0].vee() && len(word) == 2:
			switch word[1].digit() {
			case 1:
				return "V1"
			case 2:
				return "V2"
			case 5:
				return "V5"
			}
		case !word[0].vee():
			n := 0
			for _, gl := range word {
				u := gl.uprights()
				if u == 0 || !gl.strokesOnly() {
					n = 0
					break
				}
				n += u
			}
			switch n {
			case 1:
				return "I"
			case 2:
				return "II"
			case 3:
				return "III"
			}
		}
	}
	return ""
}
