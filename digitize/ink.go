package digitize

import (
	"image"
	"image/color"
	"math"
	"runtime"
	"sort"

	"gocv.io/x/gocv"
)

// percentileHist returns the smallest value v with at least q·n samples
// at or below it.
func percentileHist(hist []int, n int, q float64) int {
	k := int(q * float64(n))
	c := 0
	for v, h := range hist {
		c += h
		if c > k {
			return v
		}
	}
	return len(hist) - 1
}

// gray is a plain 8-bit map with its own width and height (no offset).
type gray struct {
	w, h int
	pix  []uint8
	raw  []uint8 // the ink before blur and line removal (nil when not kept)
}

// prepare turns an ink map into the tracer's working map: a small blur
// (merges fax dithering and JPEG speckle into strokes), then removal of
// long straight lines: in every stretch of segLen pixels of a row the 8th
// percentile of the ink is subtracted, and in every such stretch of a
// column the 5th. A grid line covers nearly all of its row or column and
// goes; a trace covers far less of any such stretch and stays, and so
// does the paper level. Columns are held to more: the QRS strokes of
// simultaneous leads stand one above the other (12×1, 6×2) and fill much
// of a column between them.
func prepare(ink *image.Gray, pxPerMM float64) *gray {
	b := ink.Bounds()
	w, h := b.Dx(), b.Dy()
	src := &gray{w: w, h: h, pix: make([]uint8, w*h)}
	for y := 0; y < h; y++ {
		copy(src.pix[y*w:(y+1)*w], ink.Pix[y*ink.Stride:y*ink.Stride+w])
	}
	r := int(math.Round(0.1 * pxPerMM)) // about 0.1 mm: a third of a fine trace
	if r < 1 {
		r = 1
	}
	if r > 3 {
		r = 3
	}
	bl := boxBlur(src, r)
	bl.raw = src.pix                     // the unblurred ink, before line removal
	seg := int(math.Round(40 * pxPerMM)) // 40 mm: 1.6 s at 25 mm/s, 4 mV at 10 mm/mV
	if seg < 64 {
		seg = 64
	}
	x0, x1, y0, y1 := gridBox(bl)
	suppressRows(bl, seg, 0.08, x0, x1)
	suppressCols(bl, seg, 0.05, y0, y1)
	return bl
}

// gridBox returns the extent of the printed area: the columns and rows
// where at least 5 % of the pixels across hold some ink. Line removal
// measures its levels inside it, so blank margins do not hide the lines.
func gridBox(g *gray) (x0, x1, y0, y1 int) {
	colN := make([]int, g.w)
	rowN := make([]int, g.h)
	for y := 0; y < g.h; y++ {
		for x, v := range g.pix[y*g.w : (y+1)*g.w] {
			if v > 8 {
				colN[x]++
				rowN[y]++
			}
		}
	}
	span := func(n []int, total int) (int, int) {
		a, b := -1, -1
		for i, c := range n {
			if c*20 >= total {
				if a < 0 {
					a = i
				}
				b = i + 1
			}
		}
		if a < 0 || b-a < len(n)/4 {
			return 0, len(n)
		}
		return a, b
	}
	x0, x1 = span(colN, g.h)
	y0, y1 = span(rowN, g.w)
	return
}

// segments splits [a, b) into pieces of about seg.
func segments(a, b, seg int) []int {
	n := max(1, int(math.Round(float64(b-a)/float64(seg))))
	out := make([]int, n+1)
	for i := range out {
		out[i] = a + (b-a)*i/n
	}
	return out
}

// boxBlur returns a (2r+1)² box blur of g (edges clamped, rounded to
// the nearest level): OpenCV's blur of the map padded by r replicated
// pixels (gocv's Blur reflects at the border). On one core (taskset -c 0
// go test -bench BoxBlur -run '^$' ./digitize/, a 3508×2480 map, r = 1)
// it takes 17 ms where the running sums written out by hand
// (boxBlurSums in the tests, the same output) took 49 ms.
func boxBlur(g *gray, r int) *gray {
	out := &gray{w: g.w, h: g.h, pix: make([]uint8, g.w*g.h)}
	if len(out.pix) == 0 || len(g.pix) != len(out.pix) {
		return out
	}
	src, err := gocv.NewMatFromBytes(g.h, g.w, gocv.MatTypeCV8UC1, g.pix)
	if err != nil {
		return out // only for an empty map, excluded above
	}
	defer src.Close()
	pad := gocv.NewMat()
	defer pad.Close()
	gocv.CopyMakeBorder(src, &pad, r, r, r, r, gocv.BorderReplicate, color.RGBA{})
	bl := gocv.NewMat()
	defer bl.Close()
	gocv.Blur(pad, &bl, image.Pt(2*r+1, 2*r+1))
	in := bl.Region(image.Rect(r, r, r+g.w, r+g.h))
	defer in.Close()
	dst, err := gocv.NewMatFromBytes(g.h, g.w, gocv.MatTypeCV8UC1, out.pix)
	if err != nil {
		return out
	}
	defer dst.Close()
	in.CopyTo(&dst)
	if v, err := dst.DataPtrUint8(); err == nil && len(v) == len(out.pix) && &v[0] != &out.pix[0] {
		copy(out.pix, v) // OpenCV chose its own buffer after all
	}
	runtime.KeepAlive(g.pix)
	return out
}

func clampI(v, lo, hi int) int {
	if v < lo {
		return lo
	}
	if v > hi {
		return hi
	}
	return v
}

func suppressRows(g *gray, seg int, q float64, xa, xb int) {
	var hist [256]int
	cuts := segments(xa, xb, seg)
	ns := len(cuts) - 1
	all := make([]uint8, g.h*ns)
	for y := 0; y < g.h; y++ {
		row := g.pix[y*g.w : (y+1)*g.w]
		for k := 0; k < ns; k++ {
			x0, x1 := cuts[k], cuts[k+1]
			hist = [256]int{}
			for _, v := range row[x0:x1] {
				hist[v]++
			}
			all[y*ns+k] = uint8(percentileHist(hist[:], x1-x0, q))
		}
	}
	// A line is thin: 1 mm above and below it the level is low again.
	d := max(2, seg/40)
	lv := make([]uint8, ns)
	for y := 0; y < g.h; y++ {
		row := g.pix[y*g.w : (y+1)*g.w]
		copy(lv, all[y*ns:(y+1)*ns])
		var above, below []uint8
		if y-d >= 0 {
			above = all[(y-d)*ns : (y-d+1)*ns]
		}
		if y+d < g.h {
			below = all[(y+d)*ns : (y+d+1)*ns]
		}
		follow := rowLine(lv, above, below)
		for k := 0; k < ns; k++ {
			x0, x1 := cuts[k], cuts[k+1]
			// The first and last segments reach out to the page edge.
			if k == 0 {
				x0 = 0
			}
			if k == ns-1 {
				x1 = g.w
			}
			p := lv[k]
			if p == 0 {
				if follow > 0 {
					if k > 0 && lv[k-1] > 0 {
						followLine(row, x0, x1, +1, follow)
					}
					if k+1 < ns && lv[k+1] > 0 {
						followLine(row, x1-1, x0-1, -1, follow)
					}
				}
				continue
			}
			for x := x0; x < x1; x++ {
				if row[x] > p {
					row[x] -= p
				} else {
					row[x] = 0
				}
			}
		}
	}
}

// rowLine settles one row's levels lv (per stretch, changed in place)
// and returns the level of the line the row holds, 0 for none. above
// and below are the levels of the rows 1 mm away (nil off the map).
//
// A flat stretch of trace fills a stretch or two as a grid line would,
// but stands out of the row: a thin run of stretches well above the
// stretches either side of it (three times), over less than half the
// row, is held to their level, and the trace keeps its ink. A grid
// line's level changes gently along the row (lighting, fading) or stops
// where the grid does; a dark area (a shadow, the table beyond the
// page) is not thin. A grid line that ends inside a stretch (the grid
// stops short of the area measured, which a page's margins or noise
// widen) fills too little of it to show there: where most stretches
// hold a line, its median level is returned, for following the line
// into the others from their ends.
func rowLine(lv, above, below []uint8) uint8 {
	ns := len(lv)
	if ns < 3 {
		return 0
	}
	for a := 0; a < ns; {
		if lv[a] < 24 {
			a++
			continue
		}
		z, low := a, lv[a]
		for z+1 < ns && lv[z+1] >= 24 {
			z++
			low = min(low, lv[z])
		}
		side := uint8(0)
		if a > 0 {
			side = lv[a-1]
		}
		if z+1 < ns {
			side = max(side, lv[z+1])
		}
		thin := above != nil && below != nil
		for k := a; k <= z && thin; k++ {
			thin = 3*int(above[k]) < int(low) && 3*int(below[k]) < int(low)
		}
		if thin && 2*(z-a+1) < ns && int(low) > 3*int(side) {
			for k := a; k <= z; k++ {
				lv[k] = side
			}
		}
		a = z + 1
	}
	var ls []int
	for _, v := range lv {
		if v > 0 {
			ls = append(ls, int(v))
		}
	}
	if 2*len(ls) < ns {
		return 0
	}
	sort.Ints(ls)
	return uint8(ls[len(ls)/2])
}

// followLine subtracts level p from row along x = from, from+dir, … (up
// to but not including to) while the row holds a line of that level:
// ink of at least p/2, with breaks of up to 3 pixels.
func followLine(row []uint8, from, to, dir int, p uint8) {
	gap := 0
	for x := from; x != to; x += dir {
		if row[x] >= p/2 {
			gap = 0
		} else if gap++; gap > 3 {
			return
		}
		if row[x] > p {
			row[x] -= p
		} else {
			row[x] = 0
		}
	}
}

func suppressCols(g *gray, seg int, q float64, ya, yb int) {
	w := g.w
	hist := make([]uint16, w*256)
	lvl := make([]uint8, w)
	keep := make([]uint8, w)
	offs := gridOffsets(seg)
	cuts := segments(ya, yb, seg)
	for k := 0; k+1 < len(cuts); k++ {
		y0, y1 := cuts[k], cuts[k+1]
		clear(hist)
		for y := y0; y < y1; y++ {
			row := g.pix[y*w : (y+1)*w]
			for x, v := range row {
				hist[x*256+int(v)]++
			}
		}
		kq := int(q * float64(y1-y0))
		for x := 0; x < w; x++ {
			h := hist[x*256 : x*256+256]
			c := 0
			lvl[x] = 255
			for v, n := range h {
				c += int(n)
				if c > kq {
					lvl[x] = uint8(v)
					break
				}
			}
		}
		if !keepGridColumns(lvl, keep, offs) {
			continue
		}
		if k == 0 {
			y0 = 0
		}
		if k == len(cuts)-2 {
			y1 = g.h
		}
		for y := y0; y < y1; y++ {
			row := g.pix[y*w : (y+1)*w]
			for x, v := range row {
				p := lvl[x]
				if v > p {
					row[x] = v - p
				} else {
					row[x] = 0
				}
			}
		}
	}
}

// gridOffsets returns the column offsets, within a pixel, of the grid's
// lines 1 mm and 5 mm either side of a column (seg is 40 mm).
func gridOffsets(seg int) []int {
	mm := float64(seg) / 40
	var offs []int
	for _, d := range []float64{1, 5} {
		c := int(math.Round(d * mm))
		offs = append(offs, c-1, c, c+1, -c-1, -c, -c+1)
	}
	return offs
}

// keepGridColumns keeps, of one stretch's column levels lvl, only those a
// grid line explains (keep is scratch space of the same length), and says
// whether any level is left. The QRS strokes of rows stacked one above
// another (at 20 mm/mV a deep S wave reaches the next row's R) can fill a
// stretch of a column as a grid line would; a grid line has others 1 mm
// or 5 mm away (offs) at a third of its level or more, a stroke has none
// and keeps its ink.
func keepGridColumns(lvl, keep []uint8, offs []int) bool {
	copy(keep, lvl)
	for x, v := range lvl {
		if v < 24 {
			continue
		}
		pitched := false
		for _, o := range offs {
			if j := x + o; j >= 0 && j < len(lvl) && 3*int(lvl[j]) >= int(v) {
				pitched = true
				break
			}
		}
		if !pitched {
			keep[x] = 0
		}
	}
	copy(lvl, keep)
	for _, v := range lvl {
		if v > 0 {
			return true
		}
	}
	return false
}
