package digitize

import (
	"math"
	"sort"
)

// Path costs of the tracer. A path pays, per column, for how far its
// pixel is from being ink ("paperness", 0 on solid ink, 1 on paper), and
// per pixel of vertical travel within a column moveInk plus movePaper
// times the paperness of the pixels it crosses. Moving along a vertical
// run of ink (a steep QRS stroke) is therefore nearly free, and jumping
// across paper costs as much as a column of paper per pixel.
const (
	inkSolid  = 0.5   // normalised ink at or above this is solid (paperness 0)
	movePaper = 1.0   // cost per pixel of vertical travel across paper
	moveInk   = 0.001 // cost per pixel of vertical travel along ink: a 300 px R wave up and down costs 0.6 columns of paper
	homePull  = 2.0   // cost per column at one row pitch from the row's baseline, growing with the square beyond half a pitch
	runThresh = 0.3   // normalised ink that still belongs to a stroke when finding its centre
)

// band is the part of the working map one panel is traced in.
type band struct {
	x0, x1   int     // columns [x0, x1)
	y0, y1   int     // rows [y0, y1)
	home     float64 // expected baseline row
	pitch    float64 // row pitch in px
	halfLine float64 // allowance for half a line width, px
}

// tracePath follows one trace through b by dynamic programming over the
// columns and returns, per column, the sub-pixel centre y (NaN where the
// trace is lost) and a confidence in [0,1].
func tracePath(g *gray, b band) (ys []float64, conf []float32) {
	e := followPath(g, b)
	if e == nil {
		return nil, nil
	}
	return e.finish(fitPenRadius([]*pathEdges{e}, b.halfLine))
}

// pathEdges is a traced path before its centre line is placed: per
// column, the run of ink the path crosses and that run's edges.
type pathEdges struct {
	b            band
	path         []int     // path row per column, band rows
	ys           []float64 // centre of a flat stretch (short), NaN where lost
	conf         []float32
	runA         []int     // the run's top row, band rows; −1 where lost
	upper, lower []float64 // the run's top and bottom edge, px
	short        []bool    // a flat stretch: its edges are its centre ± the pen radius
	hidden       []bool    // lost under a grid line as dark as the trace
}

// followPath finds the path and the runs along it; nil when the band is
// empty.
func followPath(g *gray, b band) *pathEdges {
	W, H := b.x1-b.x0, b.y1-b.y0
	if W <= 0 || H <= 2 {
		return nil
	}
	// Normalise ink by the strength of the trace's core: a high quantile
	// over columns of the column maximum (the trace crosses every column,
	// but where it lies on a removed grid line little of it is left).
	// Column-major copy of the band: the passes below walk columns.
	cm := make([]uint8, W*H)
	for i := 0; i < H; i++ {
		row := g.pix[(b.y0+i)*g.w+b.x0 : (b.y0+i)*g.w+b.x1]
		for x, v := range row {
			cm[x*H+i] = v
		}
	}
	colMax := make([]int, W)
	for x := 0; x < W; x++ {
		m := uint8(0)
		for _, v := range cm[x*H : (x+1)*H] {
			m = max(m, v)
		}
		colMax[x] = int(m)
	}
	sorted := append([]int(nil), colMax...)
	sort.Ints(sorted)
	norm := float64(sorted[len(sorted)/2])
	if norm < 24 { // nearly empty band: still trace whatever is there
		norm = math.Max(float64(sorted[len(sorted)-1]), 1)
	}
	var paperLUT, inkLUT [256]float32
	for v := range paperLUT {
		in := float64(v) / norm
		inkLUT[v] = float32(math.Min(in, 1))
		paperLUT[v] = float32(math.Max(0, 1-in/inkSolid))
	}
	// Home prior per row.
	prior := make([]float32, H)
	for i := range prior {
		d := math.Abs(float64(b.y0+i)-b.home) / b.pitch
		if d > 0.5 {
			prior[i] = float32(homePull * (d - 0.5) * (d - 0.5) * 4)
		}
	}
	back := make([]int16, W*H)
	D := make([]float32, H)
	M := make([]float32, H)
	S := make([]int16, H)
	pap := make([]float32, H)
	for x := 0; x < W; x++ {
		for i, v := range cm[x*H : (x+1)*H] {
			pap[i] = paperLUT[v]
		}
		if x == 0 {
			for i := 0; i < H; i++ {
				D[i] = pap[i] + prior[i]
				back[i] = int16(i)
			}
			continue
		}
		// Distance transform along the column chain: M[i] = min over j of
		// D[j] + cost of moving from j to i within this column.
		for i := 0; i < H; i++ {
			M[i], S[i] = D[i], int16(i)
		}
		for i := 1; i < H; i++ {
			c := M[i-1] + moveInk + movePaper*0.5*(pap[i-1]+pap[i])
			if c < M[i] {
				M[i], S[i] = c, S[i-1]
			}
		}
		for i := H - 2; i >= 0; i-- {
			c := M[i+1] + moveInk + movePaper*0.5*(pap[i+1]+pap[i])
			if c < M[i] {
				M[i], S[i] = c, S[i+1]
			}
		}
		row := back[x*H : (x+1)*H]
		for i := 0; i < H; i++ {
			D[i] = M[i] + pap[i] + prior[i]
			row[i] = S[i]
		}
	}
	best := 0
	for i := 1; i < H; i++ {
		if D[i] < D[best] {
			best = i
		}
	}
	path := make([]int, W)
	path[W-1] = best
	for x := W - 1; x > 0; x-- {
		path[x-1] = int(back[x*H+path[x]])
	}
	// The path value at x is where it leaves column x; it entered at
	// path[x-1] (when it moved within x). The stroke in column x is the
	// run of ink holding both.
	ys := make([]float64, W)
	conf := make([]float32, W)
	runA := make([]int, W)
	upper := make([]float64, W) // top edge of the run, px
	hidden := make([]bool, W)
	lower := make([]float64, W) // bottom edge
	short := make([]bool, W)    // a flat stretch: edges from its centre
	maxExt := int(math.Max(0.9*b.pitch, 6*b.halfLine))
	hw := b.halfLine
	maxBridge := max(3, int(math.Ceil(2*hw)))
	for x := 0; x < W; x++ {
		cx := cm[x*H : (x+1)*H]
		p := path[x]
		q := p
		if x > 0 {
			q = path[x-1]
		}
		lo, hi := min(p, q), max(p, q)
		at := func(i int) float32 { return inkLUT[cx[i]] }
		// pageInk says whether the page had ink at row i of this column
		// before blur and line removal.
		col := b.x0 + x
		pageInk := func(i int) bool {
			return g.raw != nil && float64(g.raw[(b.y0+i)*g.w+col]) >= inkSolid*norm
		}
		runA[x] = -1
		if at(p) < runThresh {
			found := -1
			for d := 1; d <= 2 && found < 0; d++ {
				if p-d >= 0 && at(p-d) >= runThresh {
					found = p - d
				} else if p+d < H && at(p+d) >= runThresh {
					found = p + d
				}
			}
			if found < 0 {
				// Nothing left here after line removal. If the page had
				// ink under the path before, the trace runs along (or is
				// hidden by) a grid line as dark as itself: keep the
				// path's row, with low confidence.
				ys[x] = math.NaN()
				if pageInk(p) {
					hidden[x] = true
				}
				continue
			}
			lo, hi = min(lo, found), max(hi, found)
		}
		// A stroke crossing a grid line lost its ink there with the line;
		// the run goes on across such a gap when the page had ink in it.
		a := extendRun(at, pageInk, lo, -1, H, maxExt, maxBridge)
		z := extendRun(at, pageInk, hi, +1, H, maxExt, maxBridge)
		runA[x] = a
		peak := 0.0
		var sw, swy float64
		for i := a; i <= z; i++ {
			v := float64(at(i))
			sw += v
			swy += v * float64(i)
			peak = math.Max(peak, v)
		}
		// The run's edges to a fraction of a pixel: the coverage summed
		// across an edge (the blur keeps sums) is how far the edge lies
		// from the first solid pixel inside it.
		if float64(z-a+1) <= 2*hw+3 {
			// A short run (a flat stretch): its ink-weighted centre.
			ys[x] = float64(b.y0) + swy/sw
			short[x] = true
		} else {
			upper[x] = float64(b.y0) + edgeAt(at, a, z, H, -1)
			lower[x] = float64(b.y0) + edgeAt(at, z, a, H, +1)
		}
		c := peak
		if p == 0 || p == H-1 {
			c *= 0.3 // pinned at the band edge: probably clipped or lost
		}
		conf[x] = float32(c)
	}
	return &pathEdges{b: b, path: path, ys: ys, conf: conf, runA: runA,
		upper: upper, lower: lower, short: short, hidden: hidden}
}

// finish places the centre line with a pen of radius R.
func (e *pathEdges) finish(R float64) (ys []float64, conf []float32) {
	b, W := e.b, len(e.ys)
	hw := b.halfLine
	ys, conf = append([]float64(nil), e.ys...), append([]float32(nil), e.conf...)
	runA := e.runA
	// A line drawn with a round pen of radius R is its centre line c
	// dilated by a disc: its top edge is min over d of c(x+d) − √(R²−d²).
	// Eroding the top edge by the same disc gives a bound c ≥ ah (y
	// down) that is tight wherever the disc touches the top edge: at a
	// peak, however narrow, and along a rising or falling stroke; the
	// bottom edge likewise gives c ≤ zh, tight at a trough and along
	// strokes. Where the two meet the centre line is between them; where
	// they part the column holds a tip and its flanks say which kind.
	K := max(1, int(math.Round(hw)))
	ah, zh := e.erode(R, nil)
	crossing := e.crossings(R, ys)
	for x := 0; x < W; x++ {
		if runA[x] < 0 || crossing[x] {
			continue
		}
		A, Z := ah[x], zh[x]
		if Z-A <= 1 {
			ys[x] = (A + Z) / 2
			continue
		}
		// A tip has both flanks on one side of it; a column whose flanks
		// lie one above and one below is on a stroke, and the two
		// erosions straddle it (the pen's width misjudged).
		mid := (A + Z) / 2
		above, below := 0, 0
		for _, j := range []int{x - 2*K - 1, x + 2*K + 1} {
			if j >= 0 && j < W && runA[j] >= 0 {
				if (ah[j]+zh[j])/2 < mid {
					above++
				} else {
					below++
				}
			}
		}
		switch {
		case above > 0 && below == 0: // the flanks are higher on the page: a trough
			ys[x] = Z
		case below > 0 && above == 0: // a peak
			ys[x] = A
		default:
			ys[x] = mid
		}
	}
	for x := range ys {
		if e.hidden[x] && math.IsNaN(ys[x]) {
			ys[x] = float64(b.y0+e.path[x]) + 0.0
			conf[x] = 0.15
		}
	}
	fillShortGaps(ys, conf, 0)
	return ys, conf
}

// fillShortGaps interpolates across runs of NaN no longer than maxGap
// columns (0: any length strictly inside the trace is kept as NaN when
// longer than 24 columns). Filled columns get confidence 0.
func fillShortGaps(ys []float64, conf []float32, maxGap int) {
	if maxGap <= 0 {
		maxGap = 24
	}
	n := len(ys)
	for i := 0; i < n; {
		if !math.IsNaN(ys[i]) {
			i++
			continue
		}
		j := i
		for j < n && math.IsNaN(ys[j]) {
			j++
		}
		if j-i <= maxGap {
			switch {
			case i > 0 && j < n:
				a, bb := ys[i-1], ys[j]
				for k := i; k < j; k++ {
					f := float64(k-i+1) / float64(j-i+1)
					ys[k] = a*(1-f) + bb*f
				}
			case i > 0:
				for k := i; k < j; k++ {
					ys[k] = ys[i-1]
				}
			case j < n:
				for k := i; k < j; k++ {
					ys[k] = ys[j]
				}
			}
		}
		i = j
	}
}

// modeY returns the most common value of ys (0.5 px bins, lightly
// smoothed): the isoelectric level of a trace.
func modeY(ys []float64) float64 {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range ys {
		if !math.IsNaN(v) {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	if math.IsInf(lo, 1) {
		return math.NaN()
	}
	nb := int((hi-lo)/0.5) + 1
	h := make([]float64, nb+4)
	for _, v := range ys {
		if !math.IsNaN(v) {
			h[int((v-lo)/0.5)+2]++
		}
	}
	best, bi := -1.0, 0
	for i := 2; i < nb+2; i++ {
		s := h[i-2] + 2*h[i-1] + 3*h[i] + 2*h[i+1] + h[i+2]
		if s > best {
			best, bi = s, i
		}
	}
	// Refine: mean of the samples within ±1.5 px of the peak bin.
	c := lo + float64(bi-2)*0.5 + 0.25
	var s, n float64
	for _, v := range ys {
		if !math.IsNaN(v) && math.Abs(v-c) <= 1.5 {
			s += v
			n++
		}
	}
	if n > 0 {
		return s / n
	}
	return c
}

// extendRun moves a run's end e outward (dir −1 up, +1 down) along ink
// (at ≥ runThresh) for at most maxExt pixels, across gaps of up to
// maxBridge pixels where the page had ink (pageInk) and the stroke goes
// on beyond, and returns the new end.
func extendRun(at func(int) float32, pageInk func(int) bool, e, dir, H, maxExt, maxBridge int) int {
	for ext := 0; ext < maxExt; {
		step := 0
		for k := 1; k <= maxBridge && ext+k <= maxExt; k++ {
			j := e + dir*k
			if j < 0 || j >= H {
				break
			}
			if at(j) >= runThresh {
				step = k
				break
			}
			if !pageInk(j) {
				break
			}
		}
		if step == 0 {
			break
		}
		e += dir * step
		ext += step
	}
	return e
}

// edgeAt returns the sub-pixel position of the run's edge at pixel e
// (dir −1: the top edge, +1: the bottom edge), the run reaching to o on
// the other side. Coverage (at, clipped to 1) is summed from the first
// solid pixel inside the edge outward, blur tail included; the edge lies
// that far out from the solid pixel's inner boundary.
func edgeAt(at func(int) float32, e, o, H, dir int) float64 {
	// The first solid pixel inward, at most a few pixels in.
	s := e
	for k := 0; k < 4 && s != o && at(s) < 0.95; k++ {
		s -= dir
	}
	sum := 0.0
	for i := s; i >= 0 && i < H && (i-s)*dir <= 6; i += dir {
		v := float64(at(i))
		if (i-e)*dir > 0 && (v < 0.02 || (i-e)*dir > 3) {
			break
		}
		sum += math.Min(1, v)
	}
	// Pixel s spans [s−0.5, s+0.5]; the sum is measured from its inner
	// boundary, s − 0.5·dir.
	return float64(s) - 0.5*float64(dir) + float64(dir)*sum
}
