package calib

import (
	"encoding/binary"
	"image"
	"math"
)

// lineProfile folds the ink's column (or row) means over the 1 mm period
// and returns the half width in px of the lines and their contrast.
func lineProfile(g *image.Gray, gl gridLines, vertical bool) (hw int, contrast float64) {
	w, h := g.Rect.Dx(), g.Rect.Dy()
	n := w
	if !vertical {
		n = h
	}
	sums := make([]int, n) // whole numbers: the same sums as in floating point, sooner
	if vertical {
		for y := 0; y < h; y += 4 {
			for x, v := range g.Pix[y*g.Stride : y*g.Stride+w] {
				sums[x] += int(v)
			}
		}
	} else {
		for y := 0; y < h; y++ {
			row := g.Pix[y*g.Stride : y*g.Stride+w]
			s := 0
			for x := 0; x < w; x += 4 {
				s += int(row[x])
			}
			sums[y] = s
		}
	}
	mean := make([]float64, n)
	for i, v := range sums {
		mean[i] = float64(v)
	}
	s := gl.s
	off := gl.offX
	if !vertical {
		off = gl.offY
	}
	// Fold at 0.25 px resolution over distance to the nearest line.
	const res = 4
	maxD := int(s/2*res) + 1
	fold := make([]float64, maxD+1)
	cnt := make([]float64, maxD+1)
	for i, v := range mean {
		p := float64(i)/s - off
		d := math.Abs(p-math.Round(p)) * s
		k := int(d * res)
		if k <= maxD {
			fold[k] += v
			cnt[k]++
		}
	}
	for k := range fold {
		if cnt[k] > 0 {
			fold[k] /= cnt[k]
		}
	}
	norm := float64((h + 3) / 4) // pixels summed into each mean
	if !vertical {
		norm = float64((w + 3) / 4)
	}
	base := fold[maxD] / norm
	peak := fold[0] / norm
	contrast = peak - base
	if contrast <= 0 {
		return 0, 0
	}
	half := base + contrast/2
	k := 0
	for k < maxD && fold[k]/norm > half {
		k++
	}
	hw = int(math.Ceil(float64(k)/res)) + 1
	return hw, contrast
}

// suppressLines removes the grid lines of one family. For each line and
// each 48 px segment along it, the line is located within ±2 px, its level
// is taken as the median ink on its centre, and each band pixel keeps only
// what exceeds that level or what ink on both sides of the line carries
// across it. A segment much darker than the family's usual line is a
// trace lying along the line; the usual level is used there.
func suppressLines(g *image.Gray, gl gridLines, vertical bool) {
	hw, contrast := lineProfile(g, gl, vertical)
	if contrast < 6 || hw <= 0 {
		return
	}
	hw = min(hw, int(gl.s/3)+1)
	if vertical {
		suppressVertical(g, gl, hw)
		return
	}
	w, h := g.Rect.Dx(), g.Rect.Dy()
	st := g.Stride
	pix := g.Pix
	along, across := h, w
	stepA, stepC := st, 1
	off := gl.offX
	if !vertical {
		along, across = w, h
		stepA, stepC = 1, st
		off = gl.offY
	}
	const seg = 48
	type segLine struct {
		c, a0, a1 int
		lv        int
		cls       int // the line's place in its 5 mm block (lineClass)
	}
	var segs []segLine
	var hist [256]int
	nLines := int(float64(across)/gl.s) + 2
	for n := -1; n <= nLines; n++ {
		c0 := int(math.Round((float64(n) + off) * gl.s))
		if c0 < 0 || c0 >= across {
			continue
		}
		for a0 := 0; a0 < along; a0 += seg {
			a1 := min(along, a0+seg)
			best, bestS := c0, -1
			for c := max(0, c0-2); c <= min(across-1, c0+2); c++ {
				sum := 0
				for i, e := a0*stepA+c*stepC, a1*stepA+c*stepC; i < e; i += 2 * stepA {
					sum += int(pix[i])
				}
				if sum > bestS {
					best, bestS = c, sum
				}
			}
			line := pix[a0*stepA+best*stepC : a1*stepA+best*stepC]
			for _, v := range line {
				hist[v]++
			}
			lv, acc := 0, 0
			for lv = 0; lv < 255; lv++ {
				acc += hist[lv]
				if 2*acc >= a1-a0 {
					break
				}
			}
			for _, v := range line {
				hist[v] = 0 // clear only what was counted
			}
			segs = append(segs, segLine{best, a0, a1, lv, lineClass(n)})
		}
	}
	if len(segs) == 0 {
		return
	}
	cls := make([]int, len(segs))
	lvs := make([]int, len(segs))
	for i, sg := range segs {
		cls[i], lvs[i] = sg.cls, sg.lv
	}
	usual := usualLevels(cls, lvs)
	var luts levelLUTs
	var carry [seg]uint8
	for _, sg := range segs {
		u := usual[sg.cls]
		if u < minLineLevel {
			continue // no line of this kind on the page
		}
		l := sg.lv
		if float64(l) > 1.3*u+15 {
			l = int(u)
		}
		tab := luts.get(l)
		lo, hi := max(sg.c-hw, 0), min(sg.c+hw, across-1)
		cl, cr := sg.c-hw-1, sg.c+hw+1
		// The lines run along the rows: the band is walked row by row.
		n := sg.a1 - sg.a0
		for k := range carry[:n] {
			carry[k] = 0
		}
		if cl >= 0 && cr < across {
			rl, rr := pix[cl*stepC+sg.a0:cl*stepC+sg.a1], pix[cr*stepC+sg.a0:cr*stepC+sg.a1]
			for k := range rl {
				carry[k] = min(rl[k], rr[k])
			}
		}
		for c := lo; c <= hi; c++ {
			row := pix[c*stepC+sg.a0 : c*stepC+sg.a1]
			// Paper (0) stays 0: eight pixels of it are passed at once.
			for k := 0; k < len(row); k += 8 {
				e := min(k+8, len(row))
				if e-k == 8 && binary.LittleEndian.Uint64(row[k:e]) == 0 {
					continue
				}
				for j := k; j < e; j++ {
					v := row[j]
					row[j] = keepLine(tab[v], v, carry[j])
				}
			}
		}
	}
}

// lineClass is the place of line n (counted in millimetres) in its 5 mm
// block, 0..4. One of the five places holds the heavier 5 mm lines; on a
// fax or a plain print only those may show at all.
func lineClass(n int) int { return ((n % 5) + 5) % 5 }

// usualLevels returns, per line class, what a line of that kind looks like
// on this page: the median level of all segments when the 1 mm lines show
// (a heavier 5 mm segment is then taken for a trace along the line and
// only the usual level comes out of it), else the median of each class.
// Taken over all lines at once, the median of a grid that prints only its
// 5 mm lines (a fax, a plain print) is the blank paper of the four missing
// lines, and its 5 mm lines stayed in the ink as if they were traces.
func usualLevels(cls, lv []int) [5]float64 {
	all := make([]float64, len(lv))
	var by [5][]float64
	for i, c := range cls {
		all[i] = float64(lv[i])
		by[c] = append(by[c], float64(lv[i]))
	}
	var u [5]float64
	if m := median(all); m >= minLineLevel {
		return [5]float64{m, m, m, m, m}
	}
	for c := range by {
		if len(by[c]) > 0 {
			u[c] = median(by[c])
		}
	}
	return u
}

// minLineLevel is the least median ink level of a family of grid lines
// that is taken out of the ink; below it the lines are paper.
const minLineLevel = 8

// levelLUTs caches, per line level l, the table v ↦ (v − l)·255/(256 − l)
// clamped to 0..255 (what a line pixel keeps once the line is taken out).
type levelLUTs [256]*[256]uint8

func (t *levelLUTs) get(l int) *[256]uint8 {
	l = clampI(l, 0, 255)
	if t[l] == nil {
		tab := new([256]uint8)
		rec := (255 << 16) / (256 - l) // multiply-shift, as computed before
		for v := range tab {
			tab[v] = uint8(max(0, min(255, (v-l)*rec>>16)))
		}
		t[l] = tab
	}
	return t[l]
}
