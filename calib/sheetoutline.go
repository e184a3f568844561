package calib

import (
	"image"
	"math"
	"runtime"
	"sort"

	"gocv.io/x/gocv"
	"gonum.org/v1/gonum/stat"
)

// A photographed sheet with no grid still shows its perspective: its
// outline against the table is the picture of a rectangle. sheetQuad finds
// that outline on the work image; the calibration pulses then fix the
// sheet's millimetres along each side (see fromSheet).

// sheetQuad returns the corners of the sheet in work px (top-left,
// top-right, bottom-right, bottom-left as seen), or ok=false when no
// whole sheet stands out from a darker backdrop (a scan, a sheet cut by
// the picture's edge, a backdrop as bright as the paper).
func sheetQuad(wk *work) (q [4][2]float64, ok bool) {
	w, h := wk.w, wk.h
	if w < 64 || h < 64 {
		return q, false
	}
	// Brightness of the brightest channel: paper is bright in all three.
	bri := make([]uint8, w*h)
	var hist [256]int
	for i, d := range wk.dmax {
		v := uint8(clampI(int(255-d), 0, 255))
		bri[i] = v
		hist[v]++
	}
	thr, sep := otsu(hist[:])
	// The traces' thin lines would wall the paper into cells: a running
	// maximum over a few pixels erases them (and grows the sheet by as
	// much on every side, taken off its outline below).
	bri = maxFilter(bri, w, h, sheetClose)
	if wk.trace != nil {
		wk.trace("sheet: otsu %d separation %.2f", thr, sep)
	}
	if sep < 0.5 {
		return q, false // no two clear populations
	}
	// The sheet: the bright region holding the picture's middle.
	mask := make([]bool, w*h)
	seed := -1
	for r := 0; r < min(w, h)/8 && seed < 0; r++ {
		// Rings around the middle, for a pixel of paper between the traces.
		for y := h/2 - r; y <= h/2+r && seed < 0; y++ {
			for x := w/2 - r; x <= w/2+r; x++ {
				if (abs(y-h/2) == r || abs(x-w/2) == r) && bri[y*w+x] >= thr {
					seed = y*w + x
					break
				}
			}
		}
	}
	if seed < 0 {
		return q, false
	}
	stack := []int{seed}
	mask[seed] = true
	n := 0
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		n++
		x := i % w
		for _, j := range [4]int{i - 1, i + 1, i - w, i + w} {
			switch {
			case j == i-1 && x == 0, j == i+1 && x == w-1, j < 0, j >= w*h:
				continue
			}
			if !mask[j] && bri[j] >= thr {
				mask[j] = true
				stack = append(stack, j)
			}
		}
	}
	if n < w*h/6 || n > w*h*9/10 {
		if wk.trace != nil {
			wk.trace("sheet: region %d of %d px (seed %d)", n, w*h, seed)
		}
		return q, false
	}
	// Its outline per row (left, right) and per column (top, bottom).
	ylo, yhi, xlo, xhi := h, -1, w, -1
	left, right := make([]int, h), make([]int, h)
	top, bot := make([]int, w), make([]int, w)
	for x := range top {
		top[x], bot[x] = -1, -1
	}
	for y := 0; y < h; y++ {
		left[y], right[y] = -1, -1
		row := mask[y*w : (y+1)*w]
		for x, m := range row {
			if !m {
				continue
			}
			if left[y] < 0 {
				left[y] = x
			}
			right[y] = x
			if top[x] < 0 {
				top[x] = y
			}
			bot[x] = y
		}
		if left[y] >= 0 {
			ylo, yhi = min(ylo, y), max(yhi, y)
		}
	}
	for x := 0; x < w; x++ {
		if top[x] >= 0 {
			xlo, xhi = min(xlo, x), max(xhi, x)
		}
	}
	if wk.trace != nil {
		wk.trace("sheet: region %d of %d px, box x %d–%d y %d–%d", n, w*h, xlo, xhi, ylo, yhi)
	}
	// A sheet cut by the picture's edge has no outline there.
	if ylo <= 1 || xlo <= 1 || yhi >= h-2 || xhi >= w-2 {
		return q, false
	}
	// Each side is fitted over the middle 60 % of its extent (away from
	// the corners, where the next side takes over).
	side := func(pos []int, lo, hi int, far bool) (line, bool) {
		var ts, vs []float64
		a, b := lo+(hi-lo)/5, hi-(hi-lo)/5
		for t := a; t <= b; t++ {
			if pos[t] >= 0 {
				v := float64(pos[t])
				if far {
					v += 0.5
				} else {
					v -= 0.5
				}
				ts, vs = append(ts, float64(t)), append(vs, v)
			}
		}
		return fitLine(ts, vs)
	}
	lL, ok1 := side(left, ylo, yhi, false)
	lR, ok2 := side(right, ylo, yhi, true)
	lT, ok3 := side(top, xlo, xhi, false)
	lB, ok4 := side(bot, xlo, xhi, true)
	if !ok1 || !ok2 || !ok3 || !ok4 {
		return q, false
	}
	// Each side back inward by the running maximum's reach.
	inward := func(l line, dir float64) line {
		l.b += dir * sheetClose * math.Sqrt(1+l.a*l.a)
		return l
	}
	lL, lR, lT, lB = inward(lL, 1), inward(lR, -1), inward(lT, 1), inward(lB, -1)
	// Corners: a row-side (x = a·y + b) meets a column-side (y = a·x + b).
	meet := func(v, u line) ([2]float64, bool) {
		// x = v.a·y + v.b, y = u.a·x + u.b
		d := 1 - v.a*u.a
		if math.Abs(d) < 1e-6 {
			return [2]float64{}, false
		}
		x := (v.a*u.b + v.b) / d
		return [2]float64{x, u.a*x + u.b}, true
	}
	var oks [4]bool
	q[0], oks[0] = meet(lL, lT)
	q[1], oks[1] = meet(lR, lT)
	q[2], oks[2] = meet(lR, lB)
	q[3], oks[3] = meet(lL, lB)
	for i, c := range q {
		if !oks[i] || c[0] < 0 || c[1] < 0 || c[0] > float64(w-1) || c[1] > float64(h-1) {
			return q, false
		}
	}
	// The region must fill the quadrilateral (a sheet, not a blob): its
	// area within a few per cent of the quadrilateral's.
	// The region's outline must be the quadrilateral's (a sheet, not a
	// blob): the area inside the outline, row by row (the ink's holes
	// filled), within 3 % of the quadrilateral's (a drop shadow along
	// one edge adds 1–2 %).
	span := 0
	for y := ylo; y <= yhi; y++ {
		if left[y] >= 0 {
			span += right[y] - left[y] + 1
		}
	}
	if wk.trace != nil {
		wk.trace("sheet: corners %.1f, region over quadrilateral %.4f", q, float64(span)/quadArea(q))
	}
	if a := quadArea(q); a <= 0 || math.Abs(float64(span)/a-1) > 0.03 {
		return q, false
	}
	return q, true
}

// sheetClose is the reach (work px) of the running maximum that erases
// trace lines before the sheet is outlined: wider than a trace at any
// work scale (about 0.4 to 0.8 mm).
const sheetClose = 4

// maxFilter is the running maximum of a w×h plane over (2r+1)² pixels
// (the window clipped at the edges): OpenCV's dilation by a rectangle,
// whose default border leaves the outside out. On one core (taskset -c 0
// go test -bench MaxFilter -run '^$' ./calib/, 1240×877 px, r = 4) it
// takes 0.35-0.39 ms where the two one-dimensional passes written out
// by hand (maxFilterLoops in the tests, the same output) took 31 ms.
func maxFilter(p []uint8, w, h, r int) []uint8 {
	out := make([]uint8, w*h)
	if len(out) == 0 || len(p) != len(out) {
		return out
	}
	src, err := gocv.NewMatFromBytes(h, w, gocv.MatTypeCV8UC1, p)
	if err != nil {
		return out // only for an empty plane, excluded above
	}
	defer src.Close()
	k := gocv.GetStructuringElement(gocv.MorphRect, image.Pt(2*r+1, 2*r+1))
	defer k.Close()
	dst, err := gocv.NewMatFromBytes(h, w, gocv.MatTypeCV8UC1, out)
	if err != nil {
		return out
	}
	defer dst.Close()
	gocv.Dilate(src, &dst, k)
	if v, err := dst.DataPtrUint8(); err == nil && len(v) == len(out) && &v[0] != &out[0] {
		copy(out, v) // OpenCV chose its own buffer after all
	}
	runtime.KeepAlive(p)
	return out
}

// line is v = a·t + b.
type line struct{ a, b float64 }

// fitLine fits v = a·t + b by least squares, then again without the
// points more than 3 px or three times the median residual off (a
// shadow, a dog-ear, a crease's dent in the outline).
func fitLine(ts, vs []float64) (line, bool) {
	fit := func(keep []bool) (line, bool) {
		t, v := ts, vs
		if keep != nil {
			t, v = nil, nil
			for i := range ts {
				if keep[i] {
					t = append(t, ts[i])
					v = append(v, vs[i])
				}
			}
		}
		if len(t) < 20 {
			return line{}, false
		}
		b, a := stat.LinearRegression(t, v, nil, false)
		if math.IsNaN(a) || math.IsInf(a, 0) || math.IsNaN(b) {
			return line{}, false // all t alike
		}
		return line{a, b}, true
	}
	l, ok := fit(nil)
	if !ok {
		return l, false
	}
	res := make([]float64, len(ts))
	for i := range ts {
		res[i] = math.Abs(vs[i] - (l.a*ts[i] + l.b))
	}
	sorted := append([]float64(nil), res...)
	sort.Float64s(sorted)
	lim := math.Max(3*sorted[len(sorted)/2], 1.5)
	lim = math.Min(lim, 3)
	keep := make([]bool, len(ts))
	for i, r := range res {
		keep[i] = r <= lim
	}
	return fit(keep)
}

// quadArea is the area of a quadrilateral (shoelace), positive when its
// corners run clockwise on the picture (y down).
func quadArea(q [4][2]float64) float64 {
	var a float64
	for i := range q {
		j := (i + 1) % 4
		a += q[i][0]*q[j][1] - q[j][0]*q[i][1]
	}
	return a / 2
}

// otsu returns the threshold that best splits a histogram in two and how
// well: the between-class variance over the total (0..1).
func otsu(hist []int) (uint8, float64) {
	var n, sum float64
	for v, c := range hist {
		n += float64(c)
		sum += float64(v * c)
	}
	if n == 0 {
		return 0, 0
	}
	mean := sum / n
	var tot float64
	for v, c := range hist {
		d := float64(v) - mean
		tot += d * d * float64(c)
	}
	if tot == 0 {
		return 0, 0
	}
	best, bestV := 0, -1.0
	var n0, s0 float64
	for t := 0; t < len(hist)-1; t++ {
		n0 += float64(hist[t])
		s0 += float64(t * hist[t])
		n1 := n - n0
		if n0 == 0 || n1 == 0 {
			continue
		}
		m0, m1 := s0/n0, (sum-s0)/n1
		v := n0 * n1 * (m0 - m1) * (m0 - m1) / n
		if v > bestV {
			best, bestV = t+1, v
		}
	}
	return uint8(best), bestV / tot
}
