package calib

import (
	"encoding/binary"
	"image"
	"math"
	"sort"
)

// gridLines says where the grid lines lie on the rectified page: at every
// whole millimetre, x = (n + offX)·s and y = (m + offY)·s.
type gridLines struct {
	known      bool
	s          float64
	offX, offY float64
}

// inkMap turns the rectified page into ink strength (255 = trace ink,
// 0 = paper or grid). Three steps: the darkness of the brightest channel
// (a coloured grid line is bright in its own colour, black ink is dark in
// every channel), normalised to the local paper level (uneven light in
// photos) so that black ink reaches 255 and pale coloured lines stay low;
// then any grid that still shows (grey or black grids, dots) is
// removed line by line at the known grid positions, keeping ink that
// crosses a line.
func inkMap(img *image.NRGBA, gl gridLines) (*image.Gray, image.Rectangle) {
	w, h := img.Rect.Dx(), img.Rect.Dy()
	s := gl.s
	if s <= 0 {
		s = float64(max(w, h)) / 280
	}
	bsz := max(8, int(4*s))
	paper, paperRow := paperLevel(img, bsz)
	// The page's outline: the bounding box of paper blocks.
	box := image.Rectangle{}
	for y := bsz / 2; y < h; y += bsz {
		pm := paperRow(y)
		for x := bsz / 2; x < w; x += bsz {
			if pm[x] {
				box = box.Union(image.Rect(x-bsz/2, y-bsz/2, x+bsz/2, y+bsz/2))
			}
		}
	}
	box = box.Intersect(image.Rect(0, 0, w, h))
	// ink = 1.4·(P − m)/P·255 clamped, by table on (P, m); P = 0 marks
	// background (no ink).
	lut := make([]uint8, 256*256)
	for p := 1; p < 256; p++ {
		for v := 0; v < p; v++ {
			lut[p<<8|v] = uint8(min(255, float64(p-v)/float64(p)*255*1.4))
		}
	}
	out := image.NewGray(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		pr := paper(y)
		pm := paperRow(y)
		o := out.Pix[y*out.Stride : y*out.Stride+w]
		src := img.Pix[y*img.Stride : y*img.Stride+4*w]
		pr = pr[:len(o)]
		pm = pm[:len(o)]
		for x := range o {
			if pm[x] {
				// One load a pixel; the brightest of R, G and B.
				q := src[4*x : 4*x+4 : 4*x+4]
				px := uint32(q[0]) | uint32(q[1])<<8 | uint32(q[2])<<16 | uint32(q[3])<<24
				v := max(px&0xff, px>>8&0xff, px>>16&0xff)
				o[x] = lut[int(pr[x])<<8|int(v)]
			}
		}
	}
	if gl.known && gl.s >= 2.5 {
		suppressLines(out, gl, true)
		suppressLines(out, gl, false)
		suppressDots(out, gl)
	}
	clearBackdropEdge(out, paperRow, bsz)
	return out, box
}

// clearBackdropEdge removes from the ink map the stretches of the table or
// lid around a photographed sheet that lie in blocks counted as paper: a
// block on the sheet's edge holds paper and backdrop both, its level is
// the paper's, and the backdrop in it reads as a broad band of ink along
// the edge (long straight "traces" that pull the page's middle and its
// turn). Ink connected to a backdrop block, within the blocks that touch
// one, is cleared; a trace stays unless it runs into the backdrop itself.
func clearBackdropEdge(out *image.Gray, paperRow func(y int) []bool, b int) {
	w, h := out.Rect.Dx(), out.Rect.Dy()
	bw, bh := (w+b-1)/b, (h+b-1)/b
	blk := make([]bool, bw*bh) // paper blocks
	all := true
	for by := 0; by < bh; by++ {
		pm := paperRow(min(h-1, by*b))
		for bx := 0; bx < bw; bx++ {
			blk[by*bw+bx] = pm[min(w-1, bx*b)]
			all = all && blk[by*bw+bx]
		}
	}
	if all {
		return // a scan: no backdrop
	}
	paper := func(bx, by int) bool {
		return bx < 0 || by < 0 || bx >= bw || by >= bh || blk[by*bw+bx]
	}
	// Edge blocks: paper with backdrop among their eight neighbours.
	edge := make([]bool, bw*bh)
	for by := 0; by < bh; by++ {
		for bx := 0; bx < bw; bx++ {
			if !blk[by*bw+bx] {
				continue
			}
			for dy := -1; dy <= 1 && !edge[by*bw+bx]; dy++ {
				for dx := -1; dx <= 1; dx++ {
					if !paper(bx+dx, by+dy) {
						edge[by*bw+bx] = true
						break
					}
				}
			}
		}
	}
	const thr = 64
	inEdge := func(x, y int) bool { return edge[(y/b)*bw+x/b] }
	var stack []int
	for by := 0; by < bh; by++ {
		for bx := 0; bx < bw; bx++ {
			if !edge[by*bw+bx] {
				continue
			}
			for y := by * b; y < min(h, by*b+b); y++ {
				for x := bx * b; x < min(w, bx*b+b); x++ {
					i := y*out.Stride + x
					if out.Pix[i] < thr {
						continue
					}
					// Seeds: ink beside a backdrop block.
					if !paper((x-1)/b, y/b) && x > 0 || !paper((x+1)/b, y/b) && x+1 < w ||
						!paper(x/b, (y-1)/b) && y > 0 || !paper(x/b, (y+1)/b) && y+1 < h {
						out.Pix[i] = 0
						stack = append(stack, i)
					}
				}
			}
		}
	}
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		x, y := i%out.Stride, i/out.Stride
		for _, d := range [4][2]int{{-1, 0}, {1, 0}, {0, -1}, {0, 1}} {
			nx, ny := x+d[0], y+d[1]
			if nx < 0 || ny < 0 || nx >= w || ny >= h || !inEdge(nx, ny) {
				continue
			}
			if j := ny*out.Stride + nx; out.Pix[j] >= thr {
				out.Pix[j] = 0
				stack = append(stack, j)
			}
		}
	}
}

// paperLevel estimates the paper brightness as the 90th percentile of the
// bright channel in blocks of b px, interpolated bilinearly; it returns a
// function giving one row of levels, and one that tells paper from the
// darker background around a photographed page (blocks under half the
// bright blocks' level).
func paperLevel(img *image.NRGBA, b int) (func(y int) []uint8, func(y int) []bool) {
	w, h := img.Rect.Dx(), img.Rect.Dy()
	bw, bh := (w+b-1)/b, (h+b-1)/b
	lev := make([]float32, bw*bh)
	var hist [256]int
	smp := max(2, b/12) // some 150 to 250 samples a block
	lo, hi := float32(255), float32(0)
	for by := 0; by < bh; by++ {
		for bx := 0; bx < bw; bx++ {
			hist = [256]int{}
			n := 0
			for y := by * b; y < min(h, by*b+b); y += smp {
				row := img.Pix[y*img.Stride:]
				for x := bx * b; x < min(w, bx*b+b); x += smp {
					px := binary.LittleEndian.Uint32(row[4*x : 4*x+4])
					hist[max(px&0xff, px>>8&0xff, px>>16&0xff)]++
					n++
				}
			}
			t := n / 10
			v := 255
			for acc := 0; v > 0; v-- {
				acc += hist[v]
				if acc > t {
					break
				}
			}
			fv := float32(max(v, 40))
			lev[by*bw+bx] = fv
			lo, hi = min(lo, fv), max(hi, fv)
		}
	}
	sorted := append([]float32(nil), lev...)
	sort.Slice(sorted, func(i, j int) bool { return sorted[i] < sorted[j] })
	bright := sorted[len(sorted)*9/10]
	paperBlk := make([]bool, len(lev))
	allPaper := true
	for i, v := range lev {
		paperBlk[i] = v >= 0.5*bright
		allPaper = allPaper && paperBlk[i]
	}
	mask := make([]bool, w)
	maskBY := -1
	maskRow := func(y int) []bool {
		by := min(y/b, bh-1)
		if by == maskBY {
			return mask
		}
		maskBY = by
		for x := range mask {
			mask[x] = paperBlk[by*bw+min(x/b, bw-1)]
		}
		return mask
	}
	row := make([]uint8, w)
	if hi-lo < 12 {
		// Even light (a scan): one level for the page, from the median block.
		c := uint8(medianF32(lev))
		for x := range row {
			row[x] = c
		}
		if allPaper {
			for x := range mask {
				mask[x] = true
			}
			maskRow = func(int) []bool { return mask }
		}
		return func(int) []uint8 { return row }, maskRow
	}
	// Bilinear weights per column, computed once.
	x0c := make([]int, w)
	x1c := make([]int, w)
	tx := make([]float32, w)
	for x := range tx {
		fx := (float64(x)+0.5)/float64(b) - 0.5
		x0 := int(math.Floor(fx))
		tx[x] = float32(fx - float64(x0))
		x0c[x], x1c[x] = clampI(x0, 0, bw-1), clampI(x0+1, 0, bw-1)
	}
	// The level changes slowly: one row of levels serves b/4 rows.
	step := max(1, b/4)
	lastY := -1
	return func(y int) []uint8 {
		if lastY >= 0 && y/step == lastY/step {
			return row
		}
		lastY = y
		fy := (float64(y)+0.5)/float64(b) - 0.5
		y0 := int(math.Floor(fy))
		ty := float32(fy - float64(y0))
		r0 := lev[clampI(y0, 0, bh-1)*bw:]
		r1 := lev[clampI(y0+1, 0, bh-1)*bw:]
		for x := range row {
			t := tx[x]
			a := r0[x0c[x]]*(1-t) + r0[x1c[x]]*t
			c := r1[x0c[x]]*(1-t) + r1[x1c[x]]*t
			row[x] = uint8(a*(1-ty) + c*ty)
		}
		return row
	}, maskRow
}

func medianF32(a []float32) float32 {
	f := make([]float64, len(a))
	for i, v := range a {
		f[i] = float64(v)
	}
	return float32(median(f))
}

func clampI(v, lo, hi int) int {
	return max(lo, min(hi, v))
}

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
