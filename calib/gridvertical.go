package calib

import (
	"image"
	"math"
)

// suppressVertical is suppressLines for the vertical lines, walking the
// image row by row (the column-wise walk thrashes the cache on a page).
func suppressVertical(g *image.Gray, gl gridLines, hw int) {
	w, h := g.Rect.Dx(), g.Rect.Dy()
	st, pix := g.Stride, g.Pix
	var c0s, lcls []int
	for n := -1; n <= int(float64(w)/gl.s)+2; n++ {
		c := int(math.Round((float64(n) + gl.offX) * gl.s))
		if c >= 0 && c < w {
			c0s = append(c0s, c)
			lcls = append(lcls, lineClass(n))
		}
	}
	nl := len(c0s)
	if nl == 0 {
		return
	}
	const seg = 48
	nb := (h + seg - 1) / seg
	best := make([]int, nb*nl)
	lv := make([]int, nb*nl)
	sums := make([]int32, w)
	buf := make([]uint8, nl*seg)
	var hist [256]int
	for bi := 0; bi < nb; bi++ {
		a0, a1 := bi*seg, min(h, bi*seg+seg)
		clear(sums)
		for y := a0; y < a1; y += 4 {
			for x, v := range pix[y*st : y*st+w] {
				sums[x] += int32(v)
			}
		}
		bs := best[bi*nl : bi*nl+nl]
		for li, c0 := range c0s {
			b, bv := c0, int32(-1)
			for c := max(0, c0-2); c <= min(w-1, c0+2); c++ {
				if sums[c] > bv {
					b, bv = c, sums[c]
				}
			}
			bs[li] = b
		}
		n := a1 - a0
		for y := a0; y < a1; y++ {
			row := pix[y*st : y*st+w]
			for li, c := range bs {
				buf[li*seg+y-a0] = row[c]
			}
		}
		for li := range bs {
			vals := buf[li*seg : li*seg+n]
			for _, v := range vals {
				hist[v]++
			}
			m, acc := 0, 0
			for m = 0; m < 255; m++ {
				acc += hist[m]
				if 2*acc >= n {
					break
				}
			}
			for _, v := range vals {
				hist[v] = 0
			}
			lv[bi*nl+li] = m
		}
	}
	cls := make([]int, len(lv))
	for i := range lv {
		cls[i] = lcls[i%nl]
	}
	usual := usualLevels(cls, lv)
	var luts levelLUTs
	tabs := make([]*[256]uint8, len(lv))
	for i, v := range lv {
		u := usual[cls[i]]
		switch {
		case u < minLineLevel:
			continue // no line of this kind on the page: left as it is
		case float64(v) > 1.3*u+15:
			v = int(u)
		}
		tabs[i] = luts.get(v)
	}
	for y := 0; y < h; y++ {
		bi := y / seg
		row := pix[y*st : y*st+w]
		for li := 0; li < nl; li++ {
			c := best[bi*nl+li]
			tab := tabs[bi*nl+li]
			if tab == nil {
				continue
			}
			lo, hi := max(c-hw, 0), min(c+hw, w-1)
			var vl, vr uint8
			if c-hw-1 >= 0 {
				vl = row[c-hw-1]
			}
			if c+hw+1 < w {
				vr = row[c+hw+1]
			}
			carry := min(vl, vr)
			band := row[lo : hi+1]
			for x, v := range band {
				band[x] = keepLine(tab[v], v, carry)
			}
		}
	}
}

// suppressDots removes dots left at the grid crossings (dot grids), with
// the same carry-across rule in both directions.
func suppressDots(g *image.Gray, gl gridLines) {
	w, h := g.Rect.Dx(), g.Rect.Dy()
	s := gl.s
	r := max(1, int(s*0.15+0.5)) + 1
	nx, ny := int(float64(w)/s)+2, int(float64(h)/s)+2
	var vals []float64
	for j := 0; j < ny; j += 3 {
		for i := 0; i < nx; i += 3 {
			x := int(math.Round((float64(i) + gl.offX) * s))
			y := int(math.Round((float64(j) + gl.offY) * s))
			if x >= 0 && x < w && y >= 0 && y < h {
				vals = append(vals, float64(g.Pix[y*g.Stride+x]))
			}
		}
	}
	lvl := median(vals)
	if !(lvl >= 20) { // also NaN: no grid crossing on the page
		return
	}
	get := func(x, y int) uint8 {
		if x < 0 || y < 0 || x >= w || y >= h {
			return 0
		}
		return g.Pix[y*g.Stride+x]
	}
	gl32 := float32(lvl)
	for j := -1; j < ny; j++ {
		for i := -1; i < nx; i++ {
			cx := int(math.Round((float64(i) + gl.offX) * s))
			cy := int(math.Round((float64(j) + gl.offY) * s))
			if cx < -r || cy < -r || cx >= w+r || cy >= h+r {
				continue
			}
			for y := cy - r; y <= cy+r; y++ {
				for x := cx - r; x <= cx+r; x++ {
					if x < 0 || y < 0 || x >= w || y >= h {
						continue
					}
					carry := max(min(get(cx-r-1, y), get(cx+r+1, y)), min(get(x, cy-r-1), get(x, cy+r+1)))
					p := &g.Pix[y*g.Stride+x]
					v := (float32(*p) - gl32) / (255 - gl32 + 1) * 255
					nv := uint8(0)
					if v > 0 {
						nv = uint8(min(v, 255))
					}
					*p = max(nv, carried(*p, carry))
				}
			}
		}
	}
}

// carried is what a grid-line pixel of ink v keeps from the ink carry on
// both sides of the line: ink over a line is at least as dark as the ink
// alone, so it never keeps more than its own ink, and a pixel much paler
// than the ink on both sides is paper or line between two strokes that
// lie close on either side of the line (the two strokes of a narrow
// spike), which must not be bridged.
func carried(v, carry uint8) uint8 {
	// Without branches (the outcome changes from pixel to pixel):
	// min(v, carry), masked to 0 when carry > v + carryTol.
	a, c := int(v), int(carry)
	d := c - a
	m := a + (d & (d >> 63)) // min(a, c)
	keep := ^((a + carryTol - c) >> 63)
	return uint8(m & keep)
}

// keepLine is max(t, carried(v, carry)) without branches: what a grid-line
// pixel of ink v keeps, t being what is left of it once the line's own
// level is taken out.
func keepLine(t, v, carry uint8) uint8 {
	k := int(carried(v, carry))
	d := int(t) - k
	return uint8(k + (d &^ (d >> 63))) // max(t, k)
}

// carryTol is how much paler (ink levels) than the ink on both sides a
// line pixel may be and still count as that ink crossing the line.
const carryTol = 40
