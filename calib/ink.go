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
