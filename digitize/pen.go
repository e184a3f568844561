package digitize

import "math"

// erode returns, per column, the bounds ah ≤ c ≤ zh on the centre line
// c that the top and bottom edges give for a round pen of radius R:
// ah(x) = max over d of top(x+d) + √(R²−d²), zh likewise from the bottom
// edge, with d stepping by a quarter pixel and the edges linearly
// interpolated between column centres (a steep stroke's edge crosses a
// column's centre where the coverage puts it). A flat stretch's edges
// are its centre ± R. Only the columns in cols are computed, all when
// cols is nil; the others are NaN.
func (e *pathEdges) erode(R float64, cols []int) (ah, zh []float64) {
	W := len(e.upper)
	edge := func(k int) (u, l float64) {
		if e.short[k] {
			return e.ys[k] - R, e.ys[k] + R
		}
		return e.upper[k], e.lower[k]
	}
	const step = 0.25
	nd := int(R / step)
	rise := make([]float64, 2*nd+1)
	for i := -nd; i <= nd; i++ {
		d := float64(i) * step
		rise[i+nd] = math.Sqrt(math.Max(0, R*R-d*d))
	}
	ah = make([]float64, W)
	zh = make([]float64, W)
	for x := range ah {
		ah[x], zh[x] = math.NaN(), math.NaN()
	}
	one := func(x int) {
		if e.runA[x] < 0 {
			return
		}
		mx, mn := math.Inf(-1), math.Inf(1)
		for i := -nd; i <= nd; i++ {
			pos := float64(x) + float64(i)*step
			k0 := int(math.Floor(pos))
			f := pos - float64(k0)
			if k0 < 0 || k0 >= W || e.runA[k0] < 0 {
				continue
			}
			u, l := edge(k0)
			if f > 1e-9 {
				if k0+1 >= W || e.runA[k0+1] < 0 {
					continue
				}
				u1, l1 := edge(k0 + 1)
				u = u*(1-f) + u1*f
				l = l*(1-f) + l1*f
			}
			mx = math.Max(mx, u+rise[i+nd])
			mn = math.Min(mn, l-rise[i+nd])
		}
		ah[x], zh[x] = mx, mn
	}
	if cols == nil {
		for x := 0; x < W; x++ {
			one(x)
		}
	} else {
		for _, x := range cols {
			one(x)
		}
	}
	return ah, zh
}

// strokeCols returns the columns inside a steady stroke: runs taller
// than a flat stretch in three columns in a row, both edges moving the
// same way by more than half the pen's width per column.
func (e *pathEdges) strokeCols() []int {
	hw := e.b.halfLine
	var cols []int
	for x := 1; x+1 < len(e.upper); x++ {
		if e.runA[x-1] < 0 || e.runA[x] < 0 || e.runA[x+1] < 0 || e.short[x-1] || e.short[x] || e.short[x+1] {
			continue
		}
		du1, du2 := e.upper[x]-e.upper[x-1], e.upper[x+1]-e.upper[x]
		dl1, dl2 := e.lower[x]-e.lower[x-1], e.lower[x+1]-e.lower[x]
		s := math.Min(math.Min(math.Abs(du1), math.Abs(du2)), math.Min(math.Abs(dl1), math.Abs(dl2)))
		same := (du1 > 0) == (du2 > 0) && (dl1 > 0) == (dl2 > 0) && (du1 > 0) == (dl1 > 0)
		if same && s > 0.5*hw {
			cols = append(cols, x)
		}
	}
	return cols
}

// fitPenRadius finds the pen radius that makes the two erosions agree
// along steady strokes, where both edges touch the pen: too large a
// radius makes the bounds cross, too small leaves a gap between them.
// The strokes of all the traces given are pooled (one pen draws a
// page). hw is the half width measured across flat stretches, which
// the shoulders of a soft line widen; it is returned when there are too
// few stroke columns to judge.
func fitPenRadius(es []*pathEdges, hw float64) float64 {
	cols := make([][]int, len(es))
	n := 0
	for i, e := range es {
		cols[i] = e.strokeCols()
		n += len(cols[i])
	}
	if n < 8 {
		return hw
	}
	// A gap down a column is the gap across the stroke times the secant
	// of its slope: it is measured across, so that the steepest strokes
	// do not decide alone.
	sec := make([][]float64, len(es))
	for i, e := range es {
		for _, x := range cols[i] {
			s := (math.Abs(e.upper[x+1]-e.upper[x-1]) + math.Abs(e.lower[x+1]-e.lower[x-1])) / 4
			sec[i] = append(sec[i], math.Sqrt(1+s*s))
		}
	}
	g := make([]float64, 0, n)
	gap := func(R float64) float64 {
		g = g[:0]
		for i, e := range es {
			ah, zh := e.erode(R, cols[i])
			for j, x := range cols[i] {
				g = append(g, (zh[x]-ah[x])/sec[i][j])
			}
		}
		return median(g)
	}
	// The gap shrinks as the radius grows; find where it crosses zero.
	// The flat stretches' width is an upper bound (a soft line's
	// shoulders and the blur only widen it), and a fit to few strokes is
	// noisy: the radius stays within 0.85 to 1 of it. (Bench --dpi 300
	// --conditions clean --cases 40, seeds 2 and 3: 26.3 and 25.7 dB
	// median, against 26.2 and 25.8 for 0.5 to 1.3 of it, which took
	// 4.75 px on a thick-penned strip whose flat width gave 4.1 and
	// lost it 11 dB.)
	lo, hi := 0.85*hw, hw
	if gap(lo) <= 0 {
		return lo
	}
	if gap(hi) >= 0 {
		return hi
	}
	for it := 0; it < 8; it++ {
		mid := (lo + hi) / 2
		if gap(mid) > 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2
}

// crossings marks the tall runs that are a line crossing a flat stretch
// of the trace rather than a stroke of it: no wider than the pen, with
// the trace going on at the same level on either side. A grid line left
// on the page (a fax's broken grid escapes line removal) joins the trace
// there; a stroke narrower than the pen could not be read anyway. The
// marked columns take the level of the trace beside them in ys.
func (e *pathEdges) crossings(R float64, ys []float64) []bool {
	W := len(e.ys)
	out := make([]bool, W)
	maxW := max(1, int(2*R))
	for x := 1; x < W; x++ {
		if e.runA[x] < 0 || e.short[x] || !e.short[x-1] || e.runA[x-1] < 0 {
			continue
		}
		t := x
		for t+1 < W && e.runA[t+1] >= 0 && !e.short[t+1] && t+1-x < maxW {
			t++
		}
		if t+1 >= W || e.runA[t+1] < 0 || !e.short[t+1] {
			continue
		}
		a, b := e.ys[x-1], e.ys[t+1]
		if math.Abs(a-b) > 2*R {
			continue
		}
		for k := x; k <= t; k++ {
			f := float64(k-x+1) / float64(t-x+2)
			ys[k] = a*(1-f) + b*f
			out[k] = true
		}
	}
	return out
}
