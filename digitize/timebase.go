package digitize

import (
	"math"
	"sort"
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
}

// inkOn is the working-map level counted as ink when following a trace
// to its ends.
const inkOn = 64

// runAt returns the run of ink in column x of [ya, yb) that overlaps
// [lo−slack, hi+slack], extended along contiguous ink; ok is false when
// no ink overlaps.
func runAt(g *gray, x, ya, yb, lo, hi, slack int) (a, z int, ok bool) {
	a, z = -1, -1
	for y := max(ya, lo-slack); y <= min(yb-1, hi+slack); y++ {
		if g.pix[y*g.w+x] >= inkOn {
			if a < 0 {
				a = y
			}
			z = y
		}
	}
	if a < 0 {
		return 0, 0, false
	}
	for a > ya && g.pix[(a-1)*g.w+x] >= inkOn {
		a--
	}
	for z < yb-1 && g.pix[(z+1)*g.w+x] >= inkOn {
		z++
	}
	return a, z, true
}

// walkTrace follows the trace of a row from column x (where it holds ink
// near y) in direction dir (−1 left, +1 right) until no ink continues it
// for more than gap columns, and returns the last inked column reached
// and the y range of the run there. Steep strokes are followed since a
// stroke's run overlaps its neighbours'. stop bounds the walk.
func walkTrace(g *gray, x, y, ya, yb, dir, gap, stop int) (last, lo, hi int, ok bool) {
	// Find the trace near y in column x, or in a few columns beside it.
	lo, hi = -1, -1
	for d := 0; d < 12 && lo < 0; d++ {
		xx := x + dir*d
		if xx < 0 || xx >= g.w {
			break
		}
		best := math.MaxInt
		for yy := ya; yy < yb; yy++ {
			if g.pix[yy*g.w+xx] >= inkOn {
				if dd := abs(yy - y); dd < best {
					best = dd
					if a, z, f := runAt(g, xx, ya, yb, yy, yy, 0); f {
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
	for xx := x + dir; xx >= 0 && xx < g.w && (dir < 0 && xx >= stop || dir > 0 && xx <= stop); xx += dir {
		a, z, f := runAt(g, xx, ya, yb, lo, hi, 2+miss)
		if !f {
			miss++
			if miss > gap {
				break
			}
			continue
		}
		miss = 0
		lo, hi, last = a, z, xx
	}
	return last, lo, hi, true
}

func abs(v int) int {
	if v < 0 {
		return -v
	}
	return v
}

// capEdge refines the trace end at column last (the outermost inked
// column reached walking in direction dir) to the position of the first
// or last sample, to a fraction of a pixel. Over a window inside the end
// the column sums of the ink across the line give the line's full
// column sum; the area of ink from a reference column outward, in units
// of that full sum, is the length of line beyond the reference, which
// for a round cap of half width hw reaches π·hw/4 beyond the sample
// (half a disk's area over the line's width 2·hw).
func capEdge(g *gray, last, lo, hi, dir int, pxPerMM float64) float64 {
	pix := g.raw
	if pix == nil {
		pix = g.pix
	}
	k := max(3, int(math.Round(0.5*pxPerMM)))
	ya, yb := max(0, lo-k), min(g.h, hi+k+1)
	colSum := func(x int) (s, core float64) {
		if x < 0 || x >= g.w {
			return 0, 0
		}
		for y := ya; y < yb; y++ {
			v := float64(pix[y*g.w+x])
			s += v
			core = math.Max(core, v)
		}
		return s, core
	}
	// Full column sum: the median over columns well inside the end.
	var fulls, cores []float64
	for d := k; d < 3*k; d++ {
		s, c := colSum(last - dir*d)
		fulls = append(fulls, s)
		cores = append(cores, c)
	}
	sort.Float64s(fulls)
	sort.Float64s(cores)
	full, core := fulls[len(fulls)/2], cores[len(cores)/2]
	if full <= 0 || core <= 0 {
		return float64(last) + 0.5
	}
	// Reference column k inside the end; area outward of it.
	ref := last - dir*k
	area := 0.0
	for x := ref; x != last+dir*(k+1); x += dir {
		s, _ := colSum(x)
		area += math.Min(1, s/full)
	}
	// The reference column's outer edge in continuous px.
	var edge float64
	if dir > 0 {
		edge = float64(ref) + area
	} else {
		edge = float64(ref+1) - area
	}
	hw := full / core / 2
	hw = math.Min(hw, 0.6*pxPerMM)
	return edge - float64(dir)*math.Pi/4*hw
}

// measureRow finds one row's trace ends. fallX is the last column of
// the falling stroke of the row's calibration pulse (−1 when there is
// none): a start walk that reaches it has run along the pulse's lead-out
// into the trace, and the start is then unknown.
func measureRow(g *gray, r rowInfo, pitch, pxPerMM float64, fallX int) rowMarks {
	var m rowMarks
	ya, yb := max(0, int(r.base-0.95*pitch)), min(g.h, int(r.base+0.95*pitch))
	span := r.x1 - r.x0
	if span < 20 {
		return m
	}
	gap := max(2, int(math.Round(0.25*pxPerMM)))
	y := int(r.base)
	// End: walk right from well inside.
	if last, lo, hi, ok := walkTrace(g, r.x1-span/8, y, ya, yb, +1, gap, g.w-1); ok {
		m.end = capEdge(g, last, lo, hi, +1, pxPerMM)
		m.okEnd = last < g.w-2 // a trace cut by the image edge has no end
	}
	// Start: walk left from well inside, not into the pulse.
	stop := 0
	if fallX >= 0 {
		stop = fallX + 1
	}
	if last, lo, hi, ok := walkTrace(g, r.x0+span/8, y, ya, yb, -1, gap, stop); ok {
		m.start = capEdge(g, last, lo, hi, -1, pxPerMM)
		m.okStart = last > 1 && (fallX < 0 || last > stop+gap)
	}
	return m
}

// timeBase fits x0(y) = a + b·(y − ym) and the span L to the rows' marks
// and returns each row's first-sample position and L. Rows whose marks
// are missing or disagree with the fit by more than tol px are left out;
// the shear b is only fitted with three or more rows of agreeing ends
// and is limited to what a residual rotation of 1.5° gives.
func timeBase(rows []rowInfo, marks []rowMarks, tol float64) (x0s []float64, L float64, ok bool) {
	n := len(rows)
	ym := 0.0
	for _, r := range rows {
		ym += r.base
	}
	ym /= float64(n)
	useS := make([]bool, n)
	useE := make([]bool, n)
	for i, m := range marks {
		useS[i], useE[i] = m.okStart, m.okEnd
	}
	var a, b float64
	for iter := 0; iter < 4; iter++ {
		// Robust first guesses from medians, then least squares.
		var ss, es []float64
		for i, m := range marks {
			if useS[i] {
				ss = append(ss, m.start-b*(rows[i].base-ym))
			}
			if useE[i] {
				es = append(es, m.end-b*(rows[i].base-ym))
			}
		}
		if len(ss) == 0 || len(es) == 0 {
			return nil, 0, false
		}
		a = median(ss)
		L = median(es) - a
		// Least squares over the unknowns a, L, b on the kept marks:
		// start_i = a + b·d_i, end_i = a + L + b·d_i.
		var A [3][3]float64
		var v [3]float64
		add := func(row [3]float64, obs float64) {
			for p := 0; p < 3; p++ {
				for q := 0; q < 3; q++ {
					A[p][q] += row[p] * row[q]
				}
				v[p] += row[p] * obs
			}
		}
		ne := 0
		for i, m := range marks {
			d := rows[i].base - ym
			if useS[i] {
				add([3]float64{1, 0, d}, m.start)
			}
			if useE[i] {
				add([3]float64{1, 1, d}, m.end)
				ne++
			}
		}
		fitB := ne >= 3
		if !fitB {
			// Hold b at zero: a weak prior row.
			A[2][2] += 1e6
		}
		if sol, good := solve3(A, v); good {
			a, L, b = sol[0], sol[1], sol[2]
			if lim := math.Tan(1.5 * math.Pi / 180); math.Abs(b) > lim {
				b = math.Copysign(lim, b)
			}
		}
		changed := false
		for i, m := range marks {
			d := rows[i].base - ym
			if m.okStart {
				keep := math.Abs(m.start-(a+b*d)) <= tol
				changed = changed || keep != useS[i]
				useS[i] = keep
			}
			if m.okEnd {
				keep := math.Abs(m.end-(a+L+b*d)) <= tol
				changed = changed || keep != useE[i]
				useE[i] = keep
			}
		}
		if !changed {
			break
		}
	}
	x0s = make([]float64, n)
	for i := range rows {
		x0s[i] = a + b*(rows[i].base-ym)
	}
	return x0s, L, L > 0
}

func median(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}

// solve3 solves A·x = v by Gaussian elimination with partial pivoting.
func solve3(A [3][3]float64, v [3]float64) ([3]float64, bool) {
	for c := 0; c < 3; c++ {
		p := c
		for r := c + 1; r < 3; r++ {
			if math.Abs(A[r][c]) > math.Abs(A[p][c]) {
				p = r
			}
		}
		if math.Abs(A[p][c]) < 1e-12 {
			return v, false
		}
		A[c], A[p] = A[p], A[c]
		v[c], v[p] = v[p], v[c]
		for r := c + 1; r < 3; r++ {
			f := A[r][c] / A[c][c]
			for q := c; q < 3; q++ {
				A[r][q] -= f * A[c][q]
			}
			v[r] -= f * v[c]
		}
	}
	var x [3]float64
	for c := 2; c >= 0; c-- {
		s := v[c]
		for q := c + 1; q < 3; q++ {
			s -= A[c][q] * x[q]
		}
		x[c] = s / A[c][c]
	}
	return x, true
}
