package digitize

import (
	"math"
	"sort"
)

// strokeHalfWidth estimates half the trace's line width, to a fraction
// of a pixel: across a flat stretch of line the ink coverage summed down
// a column is the line's width (the blur keeps sums).
func strokeHalfWidth(g *gray, rows []rowInfo, pxPerMM float64) float64 {
	return strokeHalfWidthQ(g, rows, 0.5, pxPerMM)
}

// strokeHalfWidthQ is strokeHalfWidth at quantile q of the columns
// sampled: a slope only thickens a line down a column, so a low quantile
// is the width across the line itself.
func strokeHalfWidthQ(g *gray, rows []rowInfo, q, pxPerMM float64) float64 {
	pix := g.raw
	if pix == nil {
		pix = g.pix
	}
	// A flat stretch of line runs down a column for the pen's width and
	// the blur's: up to 1.2 mm for the thickest pens (1 mm).
	flat := max(16, int(1.2*pxPerMM))
	reach := max(40, int(3*pxPerMM))
	var ws []float64
	for _, r := range rows {
		y := int(r.base)
		for x := r.x0; x < r.x1; x += 7 {
			if y < 0 || y >= g.h || g.pix[y*g.w+x] < 96 {
				continue
			}
			a, b := y, y
			for a > 0 && g.pix[(a-1)*g.w+x] >= 32 && y-a < reach {
				a--
			}
			for b < g.h-1 && g.pix[(b+1)*g.w+x] >= 32 && b-y < reach {
				b++
			}
			if b-a > flat { // not a flat stretch
				continue
			}
			core, sum := 0.0, 0.0
			for i := a - 2; i <= b+2; i++ {
				if i >= 0 && i < g.h {
					v := float64(pix[i*g.w+x])
					core = math.Max(core, v)
				}
			}
			// The paper level under the line (what the blur left of a grid
			// line, say) is the level at the ends of the window.
			floor := 0.0
			if a-3 >= 0 && b+3 < g.h {
				floor = math.Min(float64(pix[(a-3)*g.w+x]), float64(pix[(b+3)*g.w+x]))
			}
			if core-floor < 32 {
				continue
			}
			for i := a - 2; i <= b+2; i++ {
				if i >= 0 && i < g.h {
					sum += math.Max(0, float64(pix[i*g.w+x])-floor)
				}
			}
			// A line thinner than the blur does not reach full strength;
			// then the core understates it and the width is at least the
			// blur's. A sloping line crosses a column over its width
			// times √(1+s²); the slope s comes from the line's centre two
			// columns either side.
			s := 0.0
			if x-2 >= 0 && x+2 < g.w {
				cl, okl := inkCentre(pix, g.w, x-2, a-4, b+4, g.h, floor)
				cr, okr := inkCentre(pix, g.w, x+2, a-4, b+4, g.h, floor)
				if !okl || !okr {
					continue
				}
				s = (cr - cl) / 4
			}
			ws = append(ws, sum/(core-floor)/math.Sqrt(1+s*s))
		}
	}
	if len(ws) == 0 {
		return 1
	}
	sort.Float64s(ws)
	return math.Max(0.5, ws[int(q*float64(len(ws)-1))]/2)
}

// strongEnd returns the last column of row r, within its coarse extent,
// where the ink near the row reaches 0.6 of the row's usual strength (the
// median over columns of the column maximum): grid lines left by line
// removal stay well under it.
func strongEnd(g *gray, r rowInfo, pitch float64) int {
	ya, yb := max(0, int(r.base-0.5*pitch)), min(g.h, int(r.base+0.5*pitch))
	core := medianColMax(g, r.x0, r.x1, ya, yb)
	if core < 0 {
		return r.x1
	}
	strong := core * 6 / 10
	x := min(r.x1, g.w-1)
	for x > r.x0 && colMax(g, x, ya, yb) < strong {
		x--
	}
	return x
}

// inkCentre returns the ink-weighted centre row of column x over rows
// [ya, yb], ink above floor only.
func inkCentre(pix []uint8, w, x, ya, yb, h int, floor float64) (float64, bool) {
	var sw, swy float64
	for y := max(0, ya); y <= min(h-1, yb); y++ {
		v := math.Max(0, float64(pix[y*w+x])-floor)
		sw += v
		swy += v * float64(y)
	}
	if sw == 0 {
		return 0, false
	}
	return swy / sw, true
}

// startEdge returns the left edge of the ink where the traces begin, to
// a fraction of a pixel: along the row through the first inked column,
// the coverage summed up to a point well inside the line is the length
// of line up to that point.
func startEdge(g *gray, rows []rowInfo, s int) float64 {
	pix := g.raw
	if pix == nil {
		pix = g.pix
	}
	var es []float64
	for _, r := range rows {
		if s-4 < 0 || s+5 >= g.w {
			continue
		}
		best, yb := -1, -1
		for y := max(0, int(r.base)-60); y < min(g.h, int(r.base)+60); y++ {
			if v := int(pix[y*g.w+s+3]); v > best {
				best, yb = v, y
			}
		}
		if yb < 0 {
			continue
		}
		row := pix[yb*g.w:]
		core := math.Max(float64(row[s+3]), math.Max(float64(row[s+4]), float64(row[s+5])))
		if core < 32 {
			continue
		}
		sum := 0.0
		for x := s - 4; x < s+4; x++ {
			sum += math.Min(1, float64(row[x])/core)
		}
		es = append(es, float64(s+4)-sum)
	}
	if len(es) == 0 {
		return float64(s)
	}
	sort.Float64s(es)
	return es[len(es)/2]
}
