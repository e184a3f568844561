package digitize

import (
	"math"

	"tracelift/stats"
)

// One clock for the whole page. Every row of a multi-row printout is
// drawn on the same time base: column boundaries stand at the same
// instants in every row and a rhythm strip runs on the same clock. What
// varies from row to row on the rectified page is only where time 0
// lands (a residual rotation or shear moves each row's origin by a few
// pixels, linearly down the page). So each row's first and last inked
// column along its trace are measured, and one origin line
// x0(y) = a + b·y and one span L (px from the first to the last sample)
// are fitted to all rows jointly, with rows that disagree (a start
// merged into the calibration pulse, a trace that stops early) left out.

// rowMarks are one row's measured trace ends, in continuous px of the
// first and last sample (not of the ink, which reaches half a line width
// beyond).
type rowMarks struct {
	start, end     float64
	okStart, okEnd bool
	// joined is true when the ink runs on unbroken from the falling
	// stroke of the row's calibration pulse into the trace: the pulse is
	// printed joined to the trace, and where the trace's first sample
	// stands is not shown by the ink (fall is the falling stroke's last
	// inked column then).
	joined bool
	fall   int
	// joinedEnd and rise are the same at a pulse printed at the row's
	// right end: rise is the first column of its rising stroke (−1 when
	// there is none).
	joinedEnd bool
	rise      int
	// inner is where the trace stands unbroken when the start walk
	// bridged a break to a short piece of ink beyond it (hasInner): a
	// lead's name, or a piece of trace beyond a dropout (labelPieces
	// tells them apart).
	inner    float64
	hasInner bool
}

// inkOn is the highest working-map level needed to count as ink when
// following a trace to its ends.
const inkOn = 64

// runAt returns the run of ink in column x of [ya, yb) that overlaps
// [lo−slack, hi+slack], extended along contiguous ink; ok is false when
// no ink overlaps.
func runAt(g *gray, x, ya, yb, lo, hi, slack int, on uint8) (a, z int, ok bool) {
	a, z = -1, -1
	for y := max(ya, lo-slack); y <= min(yb-1, hi+slack); y++ {
		if g.pix[y*g.w+x] >= on {
			if a < 0 {
				a = y
			}
			z = y
		}
	}
	if a < 0 {
		return 0, 0, false
	}
	for a > ya && g.pix[(a-1)*g.w+x] >= on {
		a--
	}
	for z < yb-1 && g.pix[(z+1)*g.w+x] >= on {
		z++
	}
	return a, z, true
}

// walkTrace follows the trace of a row from column x (where it holds ink
// near y) in direction dir (−1 left, +1 right) until no ink continues it
// for more than gap columns, and returns the last inked column reached
// and the y range of the run there. Steep strokes are followed since a
// stroke's run overlaps its neighbours'. Ink found after a break counts
// only when it goes on for solid columns. stop bounds the walk.
func walkTrace(g *gray, x, y, ya, yb, dir, gap, solid, stop int, on uint8) (last, lo, hi int, ok bool) {
	return walkTraceBreak(g, x, y, ya, yb, dir, gap, solid, stop, on, nil)
}

// walkBreak is where a walk bridged a break: the last inked column
// before it and the run's rows there.
type walkBreak struct{ last, lo, hi int }

// walkTraceBreak is walkTrace that also appends the breaks it bridged,
// in walking order, to brk (when not nil).
func walkTraceBreak(g *gray, x, y, ya, yb, dir, gap, solid, stop int, on uint8, brk *[]walkBreak) (last, lo, hi int, ok bool) {
	// Find the trace near y in column x, or in a few columns beside it.
	lo, hi = -1, -1
	for d := 0; d < 12 && lo < 0; d++ {
		xx := x + dir*d
		if xx < 0 || xx >= g.w {
			break
		}
		best := math.MaxInt
		for yy := ya; yy < yb; yy++ {
			if g.pix[yy*g.w+xx] >= on {
				if dd := abs(yy - y); dd < best {
					best = dd
					if a, z, f := runAt(g, xx, ya, yb, yy, yy, 0, on); f {
						lo, hi = a, z
					}
				}
			}
		}
		x = xx
	}
	if lo < 0 {
		return 0, 0, 0, false
	}
	last = x
	miss := 0
	inside := func(xx int) bool {
		return xx >= 0 && xx < g.w && (dir < 0 && xx >= stop || dir > 0 && xx <= stop)
	}
	for xx := x + dir; inside(xx); xx += dir {
		a, z, f := runAt(g, xx, ya, yb, lo, hi, 2+min(miss, 2), on)
		if f && miss > 0 {
			// Across a break the trace goes on for a while; a speck
			// beside the end does not.
			pa, pz := a, z
			for d := 1; d <= solid && f; d++ {
				if !inside(xx + d*dir) {
					break
				}
				pa, pz, f = runAt(g, xx+d*dir, ya, yb, pa, pz, 2, on)
			}
		}
		if !f {
			miss++
			if miss > gap {
				break
			}
			continue
		}
		if miss > 0 && brk != nil {
			*brk = append(*brk, walkBreak{last: last, lo: lo, hi: hi})
		}
		miss = 0
		lo, hi, last = a, z, xx
	}
	return last, lo, hi, true
}

// backOffLine undoes the part of a walk that went on along a grid line
// left in the working map: a photocopied or grey grid survives line
// removal in part, at well under the trace's strength, and a trace that
// ends on such a line is followed to the grid's edge. From the walk's last
// column, going back (dir −1 from a right end, +1 from a left end) at the
// level where the walk ended, columns whose ink stays under 0.6 of the
// trace's usual strength (core, the median column maximum) are a line
// when there are more than 2 mm of them; the walk then ends at the first
// strong column before them, and cut is true.
func backOffLine(g *gray, last, lo, hi, ya, yb, dir, core int, pxPerMM float64) (int, int, int, bool) {
	strong := uint8(min(255, core*6/10))
	if hi-lo > int(1.5*pxPerMM) { // a tall run is a stroke, not a line
		return last, lo, hi, false
	}
	a, b := max(ya, lo-2), min(yb-1, hi+2)
	limit := int(60 * pxPerMM)
	x := last
	for n := 0; n < limit; n++ {
		if x < 0 || x >= g.w {
			return last, lo, hi, false
		}
		if colMax(g, x, a, b+1) >= int(strong) {
			break
		}
		x += dir
	}
	if abs(x-last) <= int(2*pxPerMM) || abs(x-last) >= limit {
		return last, lo, hi, false
	}
	if na, nz, ok := runAt(g, x, ya, yb, lo, hi, 2, strong); ok {
		return x, na, nz, true
	}
	return last, lo, hi, false
}

func abs(v int) int {
	if v < 0 {
		return -v
	}
	return v
}

// capEdge refines the trace end at column last (the outermost inked
// column of the working map reached walking in direction dir) to the
// position of the first or last sample, to a fraction of a pixel. A
// round cap reaches half a line width hw beyond the sample in every
// direction of travel, so the sample stands hw inside the outermost ink;
// the outermost column's strongest pixel, as a fraction of the line's
// core level, says how far into that column the ink reaches.
func capEdge(g *gray, last, lo, hi, dir int, pxPerMM, hw float64) float64 {
	pix := g.raw
	if pix == nil {
		pix = g.pix
	}
	k := max(3, int(math.Round(0.5*pxPerMM)))
	// The working map's blur already widens the run by a pixel; a wider
	// window would let specks beside the cap in.
	ya, yb := max(0, lo-1), min(g.h, hi+2)
	colMax := func(x int) float64 {
		if x < 0 || x >= g.w {
			return 0
		}
		m := 0.0
		for y := ya; y < yb; y++ {
			m = math.Max(m, float64(pix[y*g.w+x]))
		}
		return m
	}
	// The line's core level: the median column maximum well inside, over
	// a taller band than the cap's (a steep wave leaves the cap's rows
	// within a millimetre), or the cap's own strongest ink.
	var cores []float64
	for d := k; d < 3*k; d++ {
		x := last - dir*d
		if x < 0 || x >= g.w {
			continue
		}
		m := 0.0
		for y := max(0, lo-1-2*k); y < min(g.h, hi+2+2*k); y++ {
			m = math.Max(m, float64(pix[y*g.w+x]))
		}
		cores = append(cores, m)
	}
	// Columns the wave has left are no measure of it.
	top := 0.0
	for _, c := range cores {
		top = math.Max(top, c)
	}
	held := cores[:0]
	for _, c := range cores {
		if c >= 0.25*top {
			held = append(held, c)
		}
	}
	core := 0.0
	if len(held) > 0 {
		core = median(held)
	}
	for d := 0; d < k && core <= 0; d++ {
		core = math.Max(core, colMax(last-dir*d))
	}
	if core <= 0 {
		return float64(last) + 0.5
	}
	// A grid line along the trace (a photocopy's dark grid stays in the
	// unblurred ink) runs on beyond the cap: each row's level a little
	// way out is taken off, unless it is as strong as the trace itself
	// (the lead-out of a pulse close by).
	bg := make([]float64, yb-ya)
	a0 := int(math.Ceil(2*hw)) + 3
	for y := ya; y < yb; y++ {
		m := math.Inf(1)
		for a := a0; a < a0+7; a++ {
			x := last + dir*a
			if x < 0 || x >= g.w {
				m = 0
				break
			}
			m = math.Min(m, float64(pix[y*g.w+x]))
		}
		if m < 0.75*core {
			bg[y-ya] = m
		}
	}
	capMax := func(x int) float64 {
		if x < 0 || x >= g.w {
			return 0
		}
		m := 0.0
		for y := ya; y < yb; y++ {
			m = math.Max(m, float64(pix[y*g.w+x])-bg[y-ya])
		}
		return m
	}
	// A grid line across the cap (a photocopy's dark grid stays in the
	// unblurred ink) is ink above and below the trace too: the cap ends
	// there.
	d := int(math.Ceil(2*hw)) + 2
	across := func(x int) bool {
		if x < 0 || x >= g.w || lo-d-5 < 0 || hi+d+6 > g.h {
			return false
		}
		for y := lo - d - 5; y <= lo-d; y++ {
			if float64(pix[y*g.w+x]) < 0.25*core {
				return false
			}
		}
		for y := hi + d; y <= hi+d+5; y++ {
			if float64(pix[y*g.w+x]) < 0.25*core {
				return false
			}
		}
		return true
	}
	// Outermost column holding a quarter of the core or more, searched a
	// couple of columns either side of where the working map's ink ends
	// (its blur spreads the ink by a pixel).
	out := last - 2*dir
	for x := last - 2*dir; x != last+4*dir; x += dir {
		if capMax(x) < 0.25*core || across(x) {
			break
		}
		out = x
	}
	f := math.Min(1, capMax(out)/core)
	var edge float64
	if dir > 0 {
		edge = float64(out) + f
	} else {
		edge = float64(out+1) - f
	}
	return edge - float64(dir)*hw
}

// measureRow finds one row's trace ends. fallX is the last column of
// the falling stroke of the row's calibration pulse (−1 when there is
// none): a start walk that reaches it has run along the pulse's lead-out
// into the trace, and the start is then unknown.
//
// startRef and endRef are where the rows' ink coarsely starts and ends
// (after any pulse): a walk that stops more than 3 mm inside them lost
// the trace at a break.
func measureRow(g *gray, r rowInfo, pitch, pxPerMM float64, fallX, riseX int, hw float64, startRef, endRef int) rowMarks {
	m := rowMarks{rise: riseX}
	ya, yb := max(0, int(r.base-0.95*pitch)), min(g.h, int(r.base+0.95*pitch))
	span := r.x1 - r.x0
	if span < 20 {
		return m
	}
	// Breaks up to 1 mm are bridged (a removed grid line across a faint
	// trace, fax dropouts); what follows a break must run on 0.3 mm.
	gap := max(2, int(math.Round(1.0*pxPerMM)))
	solid := max(3, int(math.Round(0.3*pxPerMM)))
	// Ink is what reaches a third of the trace's usual strength in this
	// row (the median over columns of the column maximum): a faint trace
	// on a dark grid stays below a fixed level in places.
	core := medianColMax(g, r.x0, r.x1, ya, yb)
	on := uint8(inkOn)
	if core >= 0 {
		on = uint8(min(inkOn, max(24, core/3)))
	}
	y := int(r.base)
	// End: walk right from well inside.
	endStop := g.w - 1
	if riseX >= 0 {
		endStop = riseX - 1
		band := int(math.Ceil(8 * pxPerMM))
		m.joinedEnd = !emptyColumn(g, riseX-int(math.Ceil(3*pxPerMM)), riseX, max(ya, y-band), min(yb, y+band+1), max(2, int(math.Ceil(hw))), on)
	}
	if last, lo, hi, ok := walkTrace(g, r.x1-span/8, y, ya, yb, +1, gap, solid, endStop, on); ok && !m.joinedEnd {
		cut := false
		if core >= 0 {
			last, lo, hi, cut = backOffLine(g, last, lo, hi, ya, yb, -1, core, pxPerMM)
		}
		m.end = capEdge(g, last, lo, hi, +1, pxPerMM, hw)
		// A trace cut by the image edge has no end; a walk that stopped
		// well short of where the row's ink ends lost the trace, unless
		// what went on was a grid line (the row's coarse extent follows
		// it too).
		m.okEnd = last < g.w-2 && (cut || last >= endRef-int(3*pxPerMM) ||
			sparseAfter(g, last, endRef, (lo+hi)/2, int(3*pxPerMM), on))
	}
	// Start: walk left from well inside, not into the pulse.
	stop := 0
	if fallX >= 0 {
		stop = fallX + 1
	}
	var brks []walkBreak
	if last, lo, hi, ok := walkTraceBreak(g, r.x0+span/8, y, ya, yb, -1, gap, solid, stop, on, &brks); ok {
		// The ink beyond the first of the walk's breaks that leaves less
		// than labelPieceMM to its end may be a lead's name printed just
		// before the trace, its letters apart (see labelPieces).
		if !merged(fallX, last, stop, gap) {
			for _, b := range brks {
				if float64(b.last-last) < labelPieceMM*pxPerMM {
					m.inner, m.hasInner = capEdge(g, b.last, b.lo, b.hi, -1, pxPerMM, hw), true
					break
				}
			}
		}
		merged := merged(fallX, last, stop, gap)
		m.fall = fallX
		// Joined: every column of the 3 mm after the falling stroke holds
		// ink somewhere in the row's band. A gap printed between the pulse
		// and the trace empties whole columns; where the pulse is joined,
		// the lead-out and the first waves fill them, however far the
		// trace's first sample stands off the lead-out's level.
		if fallX >= 0 {
			band := int(math.Ceil(8 * pxPerMM))
			m.joined = !emptyColumn(g, fallX+1, fallX+1+int(math.Ceil(3*pxPerMM)), max(ya, y-band), min(yb, y+band+1), max(2, int(math.Ceil(hw))), on)
		}
		if fallX >= 0 && !m.joined {
			// A walk that bridged a narrow gap ran along the pulse's
			// lead-out: the trace starts after the first dip in the ink
			// along the lead-out's level. (Where the pulse is joined, the
			// trace leaves its falling stroke, and a dip after it is the
			// trace's own first wave.)
			c := min(g.w-1, stop+max(3, int(0.4*pxPerMM)))
			if a, z, ok := runAt(g, c, ya, yb, y, y, max(3, int(pxPerMM)), on); ok && z-a < int(2*pxPerMM) {
				// Only a walk that ended before the dip went along the
				// lead-out; one that ended after it found a trace that
				// starts off the lead-out's level.
				if x, d, ok := afterDip(g, c, a, z, int(6*pxPerMM), max(2, int(math.Round(0.4*pxPerMM)))); ok && last < d {
					last, lo, hi, merged = x, a, z, false
				}
			}
		}
		m.start = capEdge(g, last, lo, hi, -1, pxPerMM, hw)
		m.okStart = last > 1 && !merged && last <= startRef+int(3*pxPerMM)
	}
	return m
}

// merged reports whether a start walk that ended at last reached the
// falling stroke of the row's pulse (fallX, −1 for none) and ran into it.
func merged(fallX, last, stop, gap int) bool { return fallX >= 0 && last <= stop+gap }

// labelPieceMM is the longest piece of ink beyond a start walk's last
// break that may be a lead's name rather than trace: a name of up to
// three characters (aVR, -aVR, V6) at 8–12 pt spans 2–6 mm.
const labelPieceMM = 6.0

// labelPieces moves the starts of rows whose start walk bridged a break
// to a short piece of ink (under labelPieceMM) to where the trace stands
// unbroken, when most rows with a start did so and their unbroken starts
// agree to within 1 mm: a lead's name printed just before each row's
// trace, in the margin, lies a break before the trace in every row at
// the same place, while a break in a trace (a fax's dropout, a faint
// stroke) falls anywhere. It reports whether it moved them.
func labelPieces(marks []rowMarks, pxPerMM float64) bool {
	var inner []float64
	n := 0
	for _, m := range marks {
		if !m.okStart {
			continue
		}
		n++
		if m.hasInner {
			inner = append(inner, m.inner)
		}
	}
	if n < 2 || 3*len(inner) < 2*n {
		return false
	}
	c := median(inner)
	var dev []float64
	for _, v := range inner {
		dev = append(dev, math.Abs(v-c))
	}
	if median(dev) > 0.5*pxPerMM {
		return false
	}
	for i := range marks {
		if m := &marks[i]; m.okStart && m.hasInner && math.Abs(m.inner-c) <= pxPerMM {
			m.start = m.inner
		}
	}
	return true
}

// afterDip scans right from column x over rows [lo−1, hi+1] of the
// unblurred ink for the first column whose ink falls below a quarter of
// the level where the scan starts and returns the first column after it
// where the ink is back, and the dip's first column; false when none
// within n columns.
func afterDip(g *gray, x, lo, hi, n, e int) (after, dip int, ok bool) {
	pix := g.raw
	if pix == nil {
		pix = g.pix
	}
	// Column sums rather than maxima: a speck of dither beside the gap
	// does not fill it.
	colSum := func(x, ya, yb int) float64 {
		m := 0.0
		for y := max(0, ya); y < min(g.h, yb); y++ {
			m += float64(pix[y*g.w+x])
		}
		return m
	}
	core := 0.0
	for d := 0; d < 3 && x+d < g.w; d++ {
		core = math.Max(core, colSum(x+d, lo-1, hi+2))
	}
	if core <= 0 {
		return 0, 0, false
	}
	// The trace may start a little off the lead-out's level (the pulse
	// drawn from its own baseline): after the dip the ink is looked for
	// e rows further either way, over what the gap itself holds there
	// (a grid line along the lead-out).
	dip = -1
	floor := math.Inf(1)
	for xx := x; xx < min(g.w, x+n); xx++ {
		if dip < 0 {
			if colSum(xx, lo-1, hi+2) < 0.25*core {
				dip = xx
				floor = colSum(xx, lo-1-e, hi+2+e)
			}
			continue
		}
		v := colSum(xx, lo-1-e, hi+2+e)
		if v >= floor+0.25*core {
			return xx, dip, true
		}
		floor = math.Min(floor, v)
	}
	return 0, 0, false
}

// sparseAfter reports whether the columns (last, ref] hold ink within
// band rows of y in under a third of them: specks (a fax's, a
// photocopy's) carried the row's coarse extent on past a trace that
// really ends at last, where a trace lost at a break would go on inked.
func sparseAfter(g *gray, last, ref, y, band int, on uint8) bool {
	if ref <= last {
		return false
	}
	ya, yb := max(0, y-band), min(g.h, y+band+1)
	c, ok := inkedShare(g, last+1, ref+1, ya, yb, int(on))
	return ok && c < 1.0/3
}

// emptyColumn reports whether some column in [xa, xb) holds no run of
// ink at level on or above, within rows [ya, yb), as long as run px: a
// line crossing the column inks at least its width there, while a fax's
// salt or a photocopy's dust is single pixels.
func emptyColumn(g *gray, xa, xb, ya, yb, run int, on uint8) bool {
	for x := max(0, xa); x < min(g.w, xb); x++ {
		n, inked := 0, false
		for y := max(0, ya); y < min(g.h, yb); y++ {
			if g.pix[y*g.w+x] < on {
				n = 0
				continue
			}
			if n++; n >= run {
				inked = true
				break
			}
		}
		if !inked {
			return true
		}
	}
	return false
}

// median is stats.Median (NaN for an empty v), under the name the
// package's files use.
func median(v []float64) float64 { return stats.Median(v) }
