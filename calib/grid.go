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
	trace      func(format string, a ...any) // the work's (Options.Trace)
}

// inkCut returns the dmax level above which a pixel is taken as ink and
// left out of the grid projections (a trace's baseline is a dark straight
// line that would otherwise swamp the grid's comb). When more than 8 % of
// the page lies above the cut, the dark pixels are the grid itself (black
// grids, faxes) and nothing is cut.
func inkCut(wk *work) float32 {
	var hist [256]int
	for i := 0; i < len(wk.dmax); i += 3 {
		hist[clampI(int(wk.dmax[i]), 0, 255)]++
	}
	n := 0
	for _, c := range hist {
		n += c
	}
	q := func(f float64) int {
		t, acc := int(f*float64(n)), 0
		for v, c := range hist {
			acc += c
			if acc > t {
				return v
			}
		}
		return 255
	}
	cut := max(60, (q(0.995)+q(0.5))/2)
	return float32(cut)
}

// scanTiles projects the work image in tiles; pixels with dmax above cut
// count as ink and are left out (cut ≥ 255 keeps everything).
func scanTiles(wk *work, theta float64, ts int, cut float32) *gridScan {
	c, s := math.Cos(theta), math.Sin(theta)
	W, H := float64(wk.w-1), float64(wk.h-1)
	us := []float64{0, W * c, H * s, W*c + H*s}
	vs := []float64{0, -W * s, H * c, -W*s + H*c}
	umin, umax := minMax(us)
	vmin, vmax := minMax(vs)
	nu := int((umax-umin)/float64(ts)) + 1
	nv := int((vmax-vmin)/float64(ts)) + 1
	g := &gridScan{c: c, s: s, umin: umin, vmin: vmin, ts: ts, nu: nu, nv: nv, tiles: make([]tileProj, nu*nv), trace: wk.trace}
	for i := range g.tiles {
		g.tiles[i].iu, g.tiles[i].iv = i%nu, i/nu
		g.tiles[i].pu = make([]float32, ts+2)
		g.tiles[i].pv = make([]float32, ts+2)
	}
	fts := float64(ts)
	inv := 1 / fts
	for y := 0; y < wk.h; y++ {
		row := wk.dmin[y*wk.w : (y+1)*wk.w]
		drow := wk.dmax[y*wk.w : (y+1)*wk.w]
		u0 := float64(y)*s - umin
		v0 := float64(y)*c - vmin
		// The row is walked in stretches that stay in one tile.
		for x := 0; x < wk.w; {
			u, v := u0+float64(x)*c, v0-float64(x)*s
			iu, iv := min(int(u*inv), nu-1), min(int(v*inv), nv-1)
			xe := wk.w
			if iu < nu-1 && c > 0 {
				xe = min(xe, int(math.Ceil((float64(iu+1)*fts-u0)/c)))
			}
			switch {
			case s > 0:
				xe = min(xe, int(math.Floor((v0-float64(iv)*fts)/s))+1)
			case s < 0 && iv < nv-1:
				xe = min(xe, int(math.Ceil((float64(iv+1)*fts-v0)/-s)))
			}
			xe = max(xe, x+1)
			t := &g.tiles[iv*nu+iu]
			bu := u - float64(iu)*fts
			bv := v - float64(iv)*fts
			// Each pixel is split between the two bins around it. The two
			// bins in hand are summed in registers and written when left:
			// along the row the next pixel falls in the same bin or the
			// next one, and written straight to memory every pixel would
			// wait on the last.
			pu, pv := t.pu[:ts+2], t.pv[:ts+2]
			ub, vb := -1, -1
			var ua0, ua1, va0, va1 float32
			// Positions in 16.16 fixed point (over a tile the steps'
			// rounding adds up to a few thousandths of a pixel).
			const one = 1 << 16
			fu, fv := int(math.Floor(bu*one)), int(math.Floor(bv*one))
			du, dv := int(math.Round(c*one)), int(math.Round(s*one))
			for k, val := range row[x:xe] {
				if drow[x+k] > cut {
					val = 0
				} else if val > cut {
					val = cut
				}
				b, fr := fu>>16, float32(fu&(one-1))*(1.0/one)
				if b < 0 {
					b, fr = 0, 0
				} else if b > ts {
					b, fr = ts, 1
				}
				if b != ub {
					if b == ub+1 && ub >= 0 {
						pu[ub] += ua0
						ua0, ua1 = ua1, 0
					} else {
						if ub >= 0 {
							pu[ub] += ua0
							pu[ub+1] += ua1
						}
						ua0, ua1 = 0, 0
					}
					ub = b
				}
				ua0 += val * (1 - fr)
				ua1 += val * fr
				b, fr = fv>>16, float32(fv&(one-1))*(1.0/one)
				if b < 0 {
					b, fr = 0, 0
				} else if b > ts {
					b, fr = ts, 1
				}
				if b != vb {
					if vb >= 0 {
						pv[vb] += va0
						pv[vb+1] += va1
					}
					va0, va1, vb = 0, 0, b
				}
				va0 += val * (1 - fr)
				va1 += val * fr
				fu += du
				fv -= dv
			}
			if ub >= 0 {
				pu[ub] += ua0
				pu[ub+1] += ua1
			}
			if vb >= 0 {
				pv[vb] += va0
				pv[vb+1] += va1
			}
			n := float64(xe - x)
			t.n += n
			t.sx += n * float64(x+xe-1) / 2
			t.sy += n * float64(y)
			x = xe
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

// tileMeasure is one tile's grid phase on one axis.
type tileMeasure struct {
	ok   bool    // usable and unwrapped
	good bool    // the grid stands out in this tile (before unwrapping)
	q    float64 // grid coordinate (fundamental periods) at the centroid; mod 1 until unwrapped
	u    float64 // coordinate along the axis where q holds (the window's centre), work px
	F    float64 // local fundamental frequency
	snr  float64 // grid harmonics over their spectral surroundings
	frac float64 // weight for fitting
}

// comb is the summed power at harmonics hs of f of the windowed,
// mean-free projection xw.
func comb(xw []float64, f float64, hs []int) float64 {
	return offComb(xw, f, hs, 0)
}

// offComb is comb with each harmonic moved by d (not d·h), to sample the
// spectrum beside every harmonic.
func offComb(xw []float64, f float64, hs []int, d float64) float64 {
	var s float64
	for i := 0; i < len(hs); i += 4 {
		var fs [4]float64
		n := min(4, len(hs)-i)
		for j := 0; j < n; j++ {
			fs[j] = f*float64(hs[i+j]) + d
		}
		p := goertzel4(xw, fs)
		for j := 0; j < n; j++ {
			s += p[j]
		}
	}
	return s
}

// goertzel4 is |Σ x[n]·exp(-2πi·f·n)|² at four frequencies at once by
// Goertzel's recurrence (the power needs no phase; four independent
// recurrences keep the processor busy where one would wait on itself).
func goertzel4(x []float64, f [4]float64) [4]float64 {
	var k [4]float64
	for i := range k {
		k[i] = 2 * math.Cos(2*math.Pi*f[i])
	}
	var a1, a2, b1, b2, c1, c2, d1, d2 float64
	for _, v := range x {
		a1, a2 = v+k[0]*a1-a2, a1
		b1, b2 = v+k[1]*b1-b2, b1
		c1, c2 = v+k[2]*c1-c2, c1
		d1, d2 = v+k[3]*d1-d2, d1
	}
	return [4]float64{
		a1*a1 + a2*a2 - k[0]*a1*a2,
		b1*b1 + b2*b2 - k[1]*b1*b2,
		c1*c1 + c2*c2 - k[2]*c1*c2,
		d1*d1 + d2*d2 - k[3]*d1*d2,
	}
}

// measureTiles finds, per tile, the local line frequency (within ±12 % of
// the page's, for perspective), the harmonics' signal-to-surroundings
// ratio, and the grid coordinate of the tile's centroid modulo one period.
func measureTiles(g *gridScan, af *axisFit, useU bool) []tileMeasure {
	w := hann(g.ts + 2)
	var low []int // harmonics up to 5 for the frequency search
	for _, h := range af.harm {
		if h <= 5 {
			low = append(low, h)
		}
	}
	if len(low) == 0 {
		low = []int{af.harm[0]}
	}
	coarse := low[:min(len(low), 2)]
	fts := float64(g.ts)
	out := make([]tileMeasure, len(g.tiles))
	xw := make([]float64, 0, g.ts+2)
	for i := range g.tiles {
		t := &g.tiles[i]
		// Whole tiles only: in a tile cut by the image edge the phase does
		// not refer to any well-defined point.
		if t.n < 0.9*float64(g.ts*g.ts) {
			continue
		}
		p, off := t.pv, g.vmin+float64(t.iv*g.ts)
		if useU {
			p, off = t.pu, g.umin+float64(t.iu*g.ts)
		}
		mean := weightedMean(p, w)
		xw = xw[:0]
		for b, v := range p {
			xw = append(xw, (float64(v)-mean)*w[b])
		}
		// The phase refers to the window's centre.
		uc := off + float64(len(p)-1)/2
		// Coarse then fine search of the local fundamental.
		hc := float64(coarse[len(coarse)-1])
		step := 0.35 / (fts * hc)
		bestF, bestC := af.F, -1.0
		if len(coarse) <= 2 {
			// Two candidate frequencies (with up to two harmonics each)
			// per pass.
			for f := af.F * 0.88; f <= af.F*1.12; f += 2 * step {
				var fs [4]float64
				for j, fc := range [2]float64{f, f + step} {
					for i, h := range coarse {
						fs[2*j+i] = fc * float64(h)
					}
				}
				p := goertzel4(xw, fs)
				c0, c1 := p[0], p[2]
				if len(coarse) == 2 {
					c0, c1 = p[0]+p[1], p[2]+p[3]
				}
				if c0 > bestC {
					bestF, bestC = f, c0
				}
				if f+step <= af.F*1.12 && c1 > bestC {
					bestF, bestC = f+step, c1
				}
			}
		} else {
			for f := af.F * 0.88; f <= af.F*1.12; f += step {
				if c := comb(xw, f, coarse); c > bestC {
					bestF, bestC = f, c
				}
			}
		}
		hl := float64(low[len(low)-1])
		fine := 0.25 / (fts * hl)
		f0 := bestF
		bestC = -1
		for f := f0 - step; f <= f0+step; f += fine {
			if c := comb(xw, f, low); c > bestC {
				bestF, bestC = f, c
			}
		}
		offC := (offComb(xw, bestF, low, 2.5/fts) + offComb(xw, bestF, low, -2.5/fts)) / 2
		if offC <= 0 || bestC <= 0 {
			continue
		}
		snr := bestC / offC
		// Phase of the whole comb: the offset ψ (in periods) that best
		// lines the harmonics up, Σ |c_h| cos(arg c_h − 2πhψ); this also
		// works when the fundamental itself is weak (dot grids, where the
		// 2nd and 5th harmonics carry the 5 mm period between them).
		var cs [16]complex128
		hmax := 1
		for _, h := range af.harm {
			// Harmonics near the sampling limit are blurred away in photos
			// and carry JPEG block patterns instead; up to the 1 mm lines'
			// own (5th of a 5 mm period) is enough.
			if h < len(cs) && h <= 6 && bestF*float64(h) <= 0.3 {
				cs[h] = dtft(p, w, mean, off, bestF*float64(h))
				hmax = max(hmax, h)
			}
		}
		score := func(psi float64) float64 {
			var sc float64
			for h := 1; h <= hmax; h++ {
				if c := cs[h]; c != 0 {
					sc += cmplx.Abs(c) * math.Cos(cmplx.Phase(c)-2*math.Pi*float64(h)*psi)
				}
			}
			return sc
		}
		nst := 24 * hmax
		bestPsi, bestSc := 0.0, math.Inf(-1)
		for k := 0; k < nst; k++ {
			if sc := score(float64(k) / float64(nst)); sc > bestSc {
				bestPsi, bestSc = float64(k)/float64(nst), sc
			}
		}
		d := 1 / float64(nst)
		psi := bestPsi + d*parabolic(score(bestPsi-d), bestSc, score(bestPsi+d))
		q := bestF*uc + psi
		q -= math.Floor(q)
		out[i] = tileMeasure{ok: snr > 6, good: snr > 6, q: q, u: uc, F: bestF, snr: snr, frac: math.Log(snr)}
	}
	return out
}

// unwrap makes the tile coordinates continuous, growing from the
// strongest tile; each new tile is predicted from its unwrapped
// neighbours (linear extrapolation through the next tile beyond when that
// is known, else the local frequency times the distance).
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
	sort.Slice(order, func(a, b int) bool { return ms[order[a]].snr > ms[order[b]].snr })
	done[order[0]] = true
	for {
		bestI, bestN, bestS := -1, 0, 0.0
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
			if cnt > bestN || (cnt == bestN && cnt > 0 && ms[i].snr > bestS) {
				bestI, bestN, bestS = i, cnt, ms[i].snr
			}
		}
		if bestI < 0 {
			break
		}
		var pred float64
		cnt := 0
		ti := &g.tiles[bestI]
		for _, j := range g.neighbours(bestI) {
			if !done[j] {
				continue
			}
			tj := &g.tiles[j]
			du, dv := tj.iu-ti.iu, tj.iv-ti.iv
			ku, kv := tj.iu+du, tj.iv+dv
			var p float64
			if k := kv*g.nu + ku; ku >= 0 && ku < g.nu && kv >= 0 && kv < g.nv && done[k] {
				p = 2*ms[j].q - ms[k].q
			} else {
				p = ms[j].q + (ms[j].F+ms[bestI].F)/2*(ms[bestI].u-ms[j].u)
			}
			pred += p
			cnt++
		}
		pred /= float64(cnt)
		ms[bestI].q += math.Round(pred - ms[bestI].q)
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
