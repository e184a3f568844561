package calib

import (
	"math"
	"math/cmplx"
	"sort"
)

// The grid is measured in tiles. Each tile of the work image, taken in a
// frame turned by the coarse grid angle, is projected onto both grid axes.
// The summed tile spectra give the line period; each tile's phase at that
// period gives the local grid coordinate of its centre; a homography fitted
// to those points maps paper millimetres to image pixels (perspective and
// rotation in one).

type tileProj struct {
	iu, iv int
	n      float64 // pixels in the tile
	sx, sy float64 // sums of pixel coordinates (work px)
	pu, pv []float32
}

type gridScan struct {
	c, s       float64 // cos, sin of the frame angle
	umin, vmin float64
	ts         int
	nu, nv     int
	tiles      []tileProj
}

func scanTiles(wk *work, theta float64, ts int) *gridScan {
	c, s := math.Cos(theta), math.Sin(theta)
	W, H := float64(wk.w-1), float64(wk.h-1)
	us := []float64{0, W * c, H * s, W*c + H*s}
	vs := []float64{0, -W * s, H * c, -W*s + H*c}
	umin, umax := minMax(us)
	vmin, vmax := minMax(vs)
	nu := int((umax-umin)/float64(ts)) + 1
	nv := int((vmax-vmin)/float64(ts)) + 1
	g := &gridScan{c: c, s: s, umin: umin, vmin: vmin, ts: ts, nu: nu, nv: nv, tiles: make([]tileProj, nu*nv)}
	for i := range g.tiles {
		g.tiles[i].iu, g.tiles[i].iv = i%nu, i/nu
		g.tiles[i].pu = make([]float32, ts+2)
		g.tiles[i].pv = make([]float32, ts+2)
	}
	fts := float64(ts)
	inv := 1 / fts
	for y := 0; y < wk.h; y++ {
		row := wk.dmin[y*wk.w : (y+1)*wk.w]
		u := float64(y)*s - umin
		v := float64(y)*c - vmin
		for x, val := range row {
			iu := int(u * inv)
			iv := int(v * inv)
			if iu >= nu {
				iu = nu - 1
			}
			if iv >= nv {
				iv = nv - 1
			}
			t := &g.tiles[iv*nu+iu]
			bu := u - float64(iu)*fts
			bv := v - float64(iv)*fts
			b0 := int(bu)
			fr := float32(bu - float64(b0))
			if b0 > ts {
				b0 = ts
			}
			t.pu[b0] += val * (1 - fr)
			t.pu[b0+1] += val * fr
			b1 := int(bv)
			fv := float32(bv - float64(b1))
			if b1 > ts {
				b1 = ts
			}
			t.pv[b1] += val * (1 - fv)
			t.pv[b1+1] += val * fv
			t.n++
			t.sx += float64(x)
			t.sy += float64(y)
			u += c
			v -= s
		}
	}
	return g
}

func minMax(a []float64) (float64, float64) {
	lo, hi := a[0], a[0]
	for _, v := range a[1:] {
		lo, hi = min(lo, v), max(hi, v)
	}
	return lo, hi
}

// axisFit is the line period found along one axis of the frame.
type axisFit struct {
	F     float64 // fundamental frequency, cycles per work px
	m     int     // the strongest peak was harmonic m of F
	prom  float64 // prominence of the strongest peak over its surroundings
	harm  []int   // harmonics of F that stand out
	ok    bool
	unit  float64 // mm per fundamental period (1 or 5), set later
	tileO []float64
}

const tileFFT = 512

// fullTile says whether a tile is mostly inside the image.
func (g *gridScan) fullTile(t *tileProj) bool {
	return t.n > 0.6*float64(g.ts*g.ts)
}

// analyzeAxis sums the normalised tile power spectra along one axis and
// finds the grid's fundamental line frequency.
func analyzeAxis(g *gridScan, useU bool) axisFit {
	w := hann(g.ts + 2)
	buf := make([]complex128, tileFFT)
	sum := make([]float64, tileFFT/2+1)
	nt := 0
	for i := range g.tiles {
		t := &g.tiles[i]
		if !g.fullTile(t) {
			continue
		}
		p := t.pv
		if useU {
			p = t.pu
		}
		ps := powerSpectrum(p, w, tileFFT, buf)
		for j := range sum {
			sum[j] += ps[j]
		}
		nt++
	}
	if nt < 2 {
		return axisFit{}
	}
	n := float64(tileFFT)
	jmin := int(n * 3 / float64(g.ts)) // at least 3 periods per tile
	jmax := int(n / 2.3)               // lines at least 2.3 px apart
	// Prominence: the bin over the median of a wide window around it
	// (excluding the peak's own lobe; the median ignores other harmonics).
	win := make([]float64, 0, 256)
	prom := func(j int) float64 {
		lo, hi := int(float64(j)/1.6), int(float64(j)*1.6)+1
		ex := max(4, j/10)
		win = win[:0]
		for i := max(1, lo); i <= hi && i < len(sum); i++ {
			if i >= j-ex && i <= j+ex {
				continue
			}
			win = append(win, sum[i])
		}
		if len(win) < 4 {
			return 0
		}
		m := median(win)
		if m <= 0 {
			return 0
		}
		return sum[j] / m
	}
	best, bestP := -1, 0.0
	for j := max(jmin, 2); j <= jmax && j < len(sum)-1; j++ {
		if sum[j] < sum[j-1] || sum[j] < sum[j+1] {
			continue
		}
		r := prom(j)
		if r < 6 {
			continue
		}
		if best < 0 || sum[j] > sum[best] {
			best, bestP = j, r
		}
	}
	if best < 0 {
		return axisFit{}
	}
	fp := (float64(best) + parabolic(sum[best-1], sum[best], sum[best+1])) / n
	at := func(f float64) float64 { // best prominence near frequency f
		j := int(math.Round(f * n))
		r := 0.0
		for i := j - 2; i <= j+2; i++ {
			if i >= 2 && i < len(sum)-1 {
				r = max(r, prom(i))
			}
		}
		return r
	}
	m := 1
	for _, cand := range []int{5, 4, 3, 2} {
		if fp/float64(cand)*n < 2.5 {
			continue
		}
		all := true
		for i := 1; i < cand; i++ {
			if at(fp*float64(i)/float64(cand)) < 3 {
				all = false
				break
			}
		}
		if all {
			m = cand
			break
		}
	}
	af := axisFit{F: fp / float64(m), m: m, prom: bestP, ok: true}
	for h := 1; float64(h)*af.F < 0.45 && h <= 15; h++ {
		if at(af.F*float64(h)) >= 4 {
			af.harm = append(af.harm, h)
		}
	}
	if len(af.harm) == 0 {
		af.harm = []int{m}
	}
	return af
}

// parabolic returns the sub-bin offset of a peak from three samples.
func parabolic(a, b, c float64) float64 {
	d := a - 2*b + c
	if d == 0 {
		return 0
	}
	o := 0.5 * (a - c) / d
	return math.Max(-0.5, math.Min(0.5, o))
}

// tileMeasure is one tile's grid phase on one axis.
type tileMeasure struct {
	ok   bool
	o    float64 // phase offset in fundamental periods (mod 1 until unwrapped)
	frac float64 // share of the tile's AC power on the grid harmonics
}

// measureTiles computes each tile's phase offset along one axis.
func measureTiles(g *gridScan, af *axisFit, useU bool) []tileMeasure {
	w := hann(g.ts + 2)
	var sw, sw2 float64
	for _, x := range w {
		sw += x
		sw2 += x * x
	}
	out := make([]tileMeasure, len(g.tiles))
	for i := range g.tiles {
		t := &g.tiles[i]
		if t.n < 0.3*float64(g.ts*g.ts) {
			continue
		}
		p, off := t.pv, g.vmin+float64(t.iv*g.ts)
		if useU {
			p, off = t.pu, g.umin+float64(t.iu*g.ts)
		}
		mean := weightedMean(p, w)
		var ac float64
		for b, v := range p {
			d := float64(v) - mean
			ac += w[b] * d * d
		}
		ac /= sw
		if ac <= 1e-9 {
			continue
		}
		var gp float64
		var c1 complex128
		bestH, bestA := 0, 0.0
		for _, h := range af.harm {
			c := dtft(p, w, mean, off, af.F*float64(h))
			a := 2 * cmplx.Abs(c) / sw
			gp += a * a / 2
			if h == 1 {
				c1 = c
			}
			if h > 1 && a > bestA {
				bestH, bestA = h, a
			}
		}
		if c1 == 0 {
			c1 = dtft(p, w, mean, off, af.F)
		}
		frac := gp / ac
		a1 := 2 * cmplx.Abs(c1) / sw
		o := cmplx.Phase(c1) / (2 * math.Pi)
		// Refine with a stronger harmonic when it stands out in this tile.
		if bestH > 0 && bestA > 1.5*a1 && bestA*bestA/2 > 0.1*ac {
			ch := dtft(p, w, mean, off, af.F*float64(bestH))
			oh := cmplx.Phase(ch) / (2 * math.Pi * float64(bestH))
			k := math.Round((o - oh) * float64(bestH))
			o = oh + k/float64(bestH)
		}
		if a1*a1/2 < 0.01*ac && bestA == 0 {
			continue
		}
		out[i] = tileMeasure{ok: frac > 0.2, o: o, frac: frac}
	}
	return out
}

// unwrap makes the tile offsets continuous, best tiles first, predicting
// each from its unwrapped neighbours.
func unwrap(g *gridScan, ms []tileMeasure) {
	order := make([]int, 0, len(ms))
	for i := range ms {
		if ms[i].ok {
			order = append(order, i)
		}
	}
	if len(order) == 0 {
		return
	}
	done := make([]bool, len(ms))
	// Start at the strongest tile; grow to the neighbour with the most
	// unwrapped neighbours, ties broken by strength.
	sort.Slice(order, func(a, b int) bool { return ms[order[a]].frac > ms[order[b]].frac })
	start := order[0]
	ms[start].o -= math.Round(ms[start].o)
	done[start] = true
	for {
		bestI, bestN, bestF := -1, 0, 0.0
		for _, i := range order {
			if done[i] {
				continue
			}
			cnt := 0
			for _, j := range g.neighbours(i) {
				if done[j] {
					cnt++
				}
			}
			if cnt > bestN || (cnt == bestN && cnt > 0 && ms[i].frac > bestF) {
				bestI, bestN, bestF = i, cnt, ms[i].frac
			}
		}
		if bestI < 0 {
			break
		}
		// Prediction: mean of neighbour offsets, plus the neighbour's own
		// trend (linear extrapolation) where the tile beyond it is known.
		var pred float64
		cnt := 0
		ti := &g.tiles[bestI]
		for _, j := range g.neighbours(bestI) {
			if !done[j] {
				continue
			}
			tj := &g.tiles[j]
			p := ms[j].o
			du, dv := tj.iu-ti.iu, tj.iv-ti.iv
			ku, kv := tj.iu+du, tj.iv+dv
			if ku >= 0 && ku < g.nu && kv >= 0 && kv < g.nv {
				if k := kv*g.nu + ku; done[k] {
					p += ms[j].o - ms[k].o
				}
			}
			pred += p
			cnt++
		}
		pred /= float64(cnt)
		ms[bestI].o += math.Round(pred - ms[bestI].o)
		done[bestI] = true
	}
	for i := range ms {
		if !done[i] {
			ms[i].ok = false
		}
	}
}

func (g *gridScan) neighbours(i int) []int {
	iu, iv := i%g.nu, i/g.nu
	out := make([]int, 0, 4)
	if iu > 0 {
		out = append(out, i-1)
	}
	if iu < g.nu-1 {
		out = append(out, i+1)
	}
	if iv > 0 {
		out = append(out, i-g.nu)
	}
	if iv < g.nv-1 {
		out = append(out, i+g.nu)
	}
	return out
}

// corr is one point with paper coordinates (mm) and work-image pixels.
type corr struct {
	X, Y float64 // mm
	x, y float64 // work px
	w    float64
}

// ---- homography ----

type mat3 [9]float64

func (m mat3) apply(x, y float64) (float64, float64) {
	d := m[6]*x + m[7]*y + m[8]
	return (m[0]*x + m[1]*y + m[2]) / d, (m[3]*x + m[4]*y + m[5]) / d
}

func (a mat3) mul(b mat3) mat3 {
	var c mat3
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			for k := 0; k < 3; k++ {
				c[3*i+j] += a[3*i+k] * b[3*k+j]
			}
		}
	}
	return c
}

func (m mat3) inv() (mat3, bool) {
	a, b, c := m[0], m[1], m[2]
	d, e, f := m[3], m[4], m[5]
	g, h, i := m[6], m[7], m[8]
	A := e*i - f*h
	B := -(d*i - f*g)
	C := d*h - e*g
	det := a*A + b*B + c*C
	if det == 0 || math.IsNaN(det) {
		return mat3{}, false
	}
	r := mat3{A, -(b*i - c*h), b*f - c*e, B, a*i - c*g, -(a*f - c*d), C, -(a*h - b*g), a*e - b*d}
	for k := range r {
		r[k] /= det
	}
	return r, true
}

var ident = mat3{1, 0, 0, 0, 1, 0, 0, 0, 1}

// fitHomography finds H with (x,y) ≈ H·(X,Y) by weighted linear least
// squares on normalised coordinates (Hartley's normalisation); affine
// when affine is true.
func fitHomography(cs []corr, affine bool) (mat3, bool) {
	if len(cs) < 4 {
		return mat3{}, false
	}
	var mX, mY, mx, my, sw float64
	for _, c := range cs {
		mX += c.w * c.X
		mY += c.w * c.Y
		mx += c.w * c.x
		my += c.w * c.y
		sw += c.w
	}
	mX, mY, mx, my = mX/sw, mY/sw, mx/sw, my/sw
	var sP, sp float64
	for _, c := range cs {
		sP += c.w * math.Hypot(c.X-mX, c.Y-mY)
		sp += c.w * math.Hypot(c.x-mx, c.y-my)
	}
	sP, sp = sP/sw, sp/sw
	if sP == 0 || sp == 0 {
		return mat3{}, false
	}
	n := 8
	if affine {
		n = 6
	}
	var A [8][8]float64
	var rhs [8]float64
	add := func(row [8]float64, b, w float64) {
		for i := 0; i < n; i++ {
			for j := 0; j < n; j++ {
				A[i][j] += w * row[i] * row[j]
			}
			rhs[i] += w * row[i] * b
		}
	}
	for _, c := range cs {
		X, Y := (c.X-mX)/sP, (c.Y-mY)/sP
		x, y := (c.x-mx)/sp, (c.y-my)/sp
		add([8]float64{X, Y, 1, 0, 0, 0, -X * x, -Y * x}, x, c.w)
		add([8]float64{0, 0, 0, X, Y, 1, -X * y, -Y * y}, y, c.w)
	}
	sol, ok := solve(A, rhs, n)
	if !ok {
		return mat3{}, false
	}
	hn := mat3{sol[0], sol[1], sol[2], sol[3], sol[4], sol[5], sol[6], sol[7], 1}
	if affine {
		hn[6], hn[7] = 0, 0
	}
	tin := mat3{1 / sP, 0, -mX / sP, 0, 1 / sP, -mY / sP, 0, 0, 1}
	tout := mat3{sp, 0, mx, 0, sp, my, 0, 0, 1}
	return tout.mul(hn).mul(tin), true
}

// solve does Gaussian elimination with partial pivoting on the n×n head.
func solve(A [8][8]float64, b [8]float64, n int) ([8]float64, bool) {
	for col := 0; col < n; col++ {
		p := col
		for r := col + 1; r < n; r++ {
			if math.Abs(A[r][col]) > math.Abs(A[p][col]) {
				p = r
			}
		}
		if math.Abs(A[p][col]) < 1e-12 {
			return b, false
		}
		A[p], A[col] = A[col], A[p]
		b[p], b[col] = b[col], b[p]
		for r := col + 1; r < n; r++ {
			f := A[r][col] / A[col][col]
			for k := col; k < n; k++ {
				A[r][k] -= f * A[col][k]
			}
			b[r] -= f * b[col]
		}
	}
	var x [8]float64
	for r := n - 1; r >= 0; r-- {
		s := b[r]
		for k := r + 1; k < n; k++ {
			s -= A[r][k] * x[k]
		}
		x[r] = s / A[r][r]
	}
	return x, true
}

// residual is the distance in work px between H·(X,Y) and (x,y).
func residual(h mat3, c corr) float64 {
	x, y := h.apply(c.X, c.Y)
	return math.Hypot(x-c.x, y-c.y)
}
