package calib

import (
	"math"

	"tracelift/stats"
)

// gridModel is the grid found on the work image.
type gridModel struct {
	H          mat3    // paper mm (X right, Y down in the grid frame) → work px
	unitX      float64 // mm per fundamental period on each axis (1 or 5)
	unitY      float64
	X0, X1     float64 // extent of the measured grid, mm
	Y0, Y1     float64
	tiles      int     // tiles that carried both axes
	rmsMM      float64 // fit residual
	conf       float64
	perspTerms float64 // |h31|,|h32| scaled to the page size: 0 for a flat scan
	scaleErr   float64 // how far the model's local scale lies from the tiles' own (relative, worse axis)
	// sheet is the photographed sheet's outline (work px, corners in
	// order) when the grid was measured on the sheet flattened by it;
	// nothing outside it is ink.
	sheet *[4][2]float64
}

// scaleAgreement compares the model's scale with the one each tile reads
// from its own line frequency: the median of their ratio less one, on the
// worse axis. Phases alone cannot tell a model that slips one fine period
// between every pair of tiles from the truth (both fit every tile); the
// tiles' frequencies can.
func scaleAgreement(G mat3, os []obs, c, s float64) float64 {
	var r [2][]float64
	for _, o := range os {
		if o.f <= 0 {
			continue
		}
		dx, dy := c, s
		if o.axis == 1 {
			dx, dy = -s, c
		}
		const e = 2.0
		X0, Y0 := G.apply(o.x-e*dx, o.y-e*dy)
		X1, Y1 := G.apply(o.x+e*dx, o.y+e*dy)
		d := (X1 - X0) / (2 * e)
		if o.axis == 1 {
			d = (Y1 - Y0) / (2 * e)
		}
		r[o.axis] = append(r[o.axis], math.Abs(d)/o.f)
	}
	worst := 0.0
	for _, a := range r {
		if len(a) > 0 {
			worst = math.Max(worst, math.Abs(median(a)-1))
		}
	}
	return worst
}

// quality ranks two fits of one page's grid: a small residual over many
// tiles, at the scale the tiles read themselves.
func (gm gridModel) quality() float64 {
	return math.Exp(-gm.rmsMM/0.1) * math.Exp(-gm.scaleErr/0.01) * math.Min(1, float64(gm.tiles)/40)
}

// measureGrid finds the grid, or returns ok=false when there is none.
func measureGrid(wk *work, theta float64) (gridModel, bool) {
	ts := min(max(min(wk.w, wk.h)/5, 128), 250)
	if min(wk.w, wk.h) < 2*64 {
		return gridModel{}, false
	}
	if min(wk.w, wk.h) < 4*ts {
		// A strip: at least four rows of tiles across it, so the lines
		// along it are seen at several places across (one row cannot tell
		// the scale across from an offset).
		ts = max(min(wk.w, wk.h)/4, 64)
	}
	// First with the ink left out; a black grid (fax, photocopy) is as
	// dark as the ink, so a second try keeps every pixel.
	var g *gridScan
	var au, av axisFit
	for _, cut := range []float32{inkCut(wk), 1e9} {
		g = scanTiles(wk, theta, ts, cut)
		au = analyzeAxis(g, true)
		av = analyzeAxis(g, false)
		if au.ok && av.ok {
			break
		}
	}
	if !au.ok || !av.ok {
		return gridModel{}, false
	}
	// Where the 1 mm lines were seen under the 5 mm period, measure on
	// the 1 mm lines themselves: their phase is sharp in every tile, while
	// the 5 mm harmonics are often weak and would pick the wrong line.
	au5, av5 := au, av // as found, before any axis moves to its 1 mm lines
	for _, af := range []*axisFit{&au, &av} {
		wk5 := af.m == 5
		if !wk5 || 5*af.F > 0.4 {
			continue
		}
		var hs []int
		for _, h := range af.harm {
			if h%5 == 0 {
				hs = append(hs, h/5)
			}
		}
		if len(hs) == 0 || hs[0] != 1 {
			hs = append([]int{1}, hs...)
		}
		af.F *= 5
		af.m, af.harm, af.oneMM = 1, hs, true
	}
	// Unwrapped from tile to tile, the 1 mm lines may slip a whole period
	// between every pair of tiles alike (a local period misread by 1–2 %
	// over some fifty periods a tile), which fits well and is wrong; the
	// 5 mm period, five times as tolerant, chooses their whole periods.
	var seed *mat3
	if au.oneMM || av.oneMM {
		if g5, ok5 := fitAxes(wk, g, au5, av5, ts, nil, [2]bool{}); ok5 {
			if G5, ok := g5.H.inv(); ok {
				seed = &G5
			}
		}
	}
	gm, ok := fitAxes(wk, g, au, av, ts, nil, [2]bool{})
	if seed != nil {
		gs, oks := fitAxes(wk, g, au, av, ts, seed, [2]bool{au.oneMM, av.oneMM})
		if wk.trace != nil {
			wk.trace("unwrapped: ok %v scale off %.4f rms %.3f; seeded: ok %v scale off %.4f rms %.3f", ok, gm.scaleErr, gm.rmsMM, oks, gs.scaleErr, gs.rmsMM)
		}
		if oks && (!ok || gs.scaleErr < gm.scaleErr) {
			gm, ok = gs, true
		}
	}
	// A photo seen at a slant blurs the 1 mm lines' phase across a tile
	// more than the 5 mm one: when one axis measured on 5 mm and the
	// other on 1 mm, also try the second on 5 mm and keep the better fit.
	for _, pair := range [][2]*axisFit{{&au, &av}, {&av, &au}} {
		five, one := pair[0], pair[1]
		if five.m == 1 && !five.oneMM && one.m == 1 && !one.oneMM && five.F*5 < one.F*1.3 && five.F*5 > one.F/1.3 && hasHarm(five.harm, 5) {
			alt := *one
			alt.F, alt.harm = one.F/5, []int{1, 2, 3, 4, 5}
			a, b := au, av
			if one == &av {
				b = alt
			} else {
				a = alt
			}
			if gm2, ok2 := fitAxes(wk, g, a, b, ts, nil, [2]bool{}); ok2 && (!ok || gm2.rmsMM < gm.rmsMM*0.8) {
				gm, ok = gm2, true
			}
		}
	}
	return gm, ok
}

func hasHarm(hs []int, h int) bool {
	for _, x := range hs {
		if x == h {
			return true
		}
	}
	return false
}

// fitAxes measures the tiles at the two axes' periods, chooses the units,
// unwraps and fits the homography. With a seed (work px → mm, from a
// coarser fit) each tile's whole periods on the axes marked in seedAxis
// (0 = X, 1 = Y) come from the seed instead of from unwrapping.
func fitAxes(wk *work, g *gridScan, au, av axisFit, ts int, seed *mat3, seedAxis [2]bool) (gridModel, bool) {
	mu := measureTiles(g, &au, true)
	mv := measureTiles(g, &av, false)
	unwrap(g, mu)
	unwrap(g, mv)
	if len(au.harm) == 1 && len(av.harm) == 1 && !sparseGridOK(g, mu, mv) {
		// A lone spectral line on each axis, standing out in few tiles:
		// the texture of a plain sheet through a camera (JPEG, resampling,
		// noise) rather than a grid, which shows its harmonics and covers
		// the page.
		if wk.trace != nil {
			wk.trace("no harmonics and few tiles: not a grid")
		}
		return gridModel{}, false
	}

	// Extent of the valid tiles along each axis, in fundamental periods.
	spanPeriods := func(ms []tileMeasure, useU bool, F float64) float64 {
		lo, hi := math.Inf(1), math.Inf(-1)
		for i, m := range ms {
			if !m.ok {
				continue
			}
			t := &g.tiles[i]
			x, y := t.sx/t.n, t.sy/t.n
			c := -g.s*x + g.c*y
			if useU {
				c = g.c*x + g.s*y
			}
			lo, hi = min(lo, c), max(hi, c)
		}
		if hi < lo {
			return 0
		}
		return (hi - lo + float64(ts)) * F
	}
	// Whole-image extent along each axis, in periods.
	extent := func(useU bool, F float64) float64 {
		W, H := float64(wk.w), float64(wk.h)
		if useU {
			return (W*math.Abs(g.c) + H*math.Abs(g.s)) * F
		}
		return (W*math.Abs(g.s) + H*math.Abs(g.c)) * F
	}
	// The fundamental is 5 mm when the 1 mm lines were seen beneath it;
	// otherwise it is 1 mm when there are too many periods across the page
	// for 5 mm ones (a page is at most about 450 mm).
	unitFor := func(af axisFit, nValid, nImage float64) float64 {
		if af.oneMM {
			return 1
		}
		if af.m == 5 {
			return 5
		}
		if nValid >= 100 || nImage >= 150 {
			return 1
		}
		return 5
	}
	nu := spanPeriods(mu, true, au.F)
	nv := spanPeriods(mv, false, av.F)
	eu, ev := extent(true, au.F), extent(false, av.F)
	// Choose the units of both axes together: 5 where the 1 mm lines were
	// seen beneath; the two scales must agree (square pixels) or differ
	// about twofold (a fax at 200 × 100 dpi); 1 mm periods need enough of
	// them across the page, 5 mm ones cannot be too many (a page is at
	// most about 450 mm); otherwise each axis's own reading wins.
	bestScore := math.Inf(1)
	var bu, bv float64
	for _, uu := range []float64{1, 5} {
		for _, uv := range []float64{1, 5} {
			if (au.m == 5 && uu != 5) || (av.m == 5 && uv != 5) || (au.oneMM && uu != 1) || (av.oneMM && uv != 1) {
				continue
			}
			r := (1 / (au.F * uu)) / (1 / (av.F * uv))
			if r < 1 {
				r = 1 / r
			}
			var sc float64
			switch {
			case r < 1.25:
			case r > 1.7 && r < 2.35:
				sc += 1
			default:
				continue
			}
			for i, ax := range []struct{ unit, nValid, nImage float64 }{{uu, nu, eu}, {uv, nv, ev}} {
				// Fewer than 60 periods across the picture are too few
				// for 1 mm lines, unless the other axis knows its unit
				// (its 5 mm lines seen with their harmonics, or 1 mm
				// lines seen beneath them) and reads the same scale: a
				// strip of paper is only 40–60 mm tall.
				other := av
				if i == 1 {
					other = au
				}
				anchored := r < 1.25 && (other.m == 5 || other.oneMM)
				if ax.unit == 1 && ax.nImage < 60 && !(anchored && ax.nImage >= 30) {
					sc += 10
				}
				if ax.unit == 5 && ax.nValid > 100 {
					sc += 10
				}
			}
			if uu != unitFor(au, nu, eu) {
				sc += 0.5
			}
			if uv != unitFor(av, nv, ev) {
				sc += 0.5
			}
			if sc < bestScore {
				bestScore, bu, bv = sc, uu, uv
			}
		}
	}
	if math.IsInf(bestScore, 1) || bestScore >= 10 {
		if wk.trace != nil {
			wk.trace("axes disagree: F %.4f %.4f m %d %d", au.F, av.F, au.m, av.m)
		}
		return gridModel{}, false
	}
	au.unit, av.unit = bu, bv

	if wk.trace != nil {
		cu, cv := 0, 0
		for i := range mu {
			if mu[i].ok {
				cu++
			}
			if mv[i].ok {
				cv++
			}
		}
		wk.trace("tiles %d ok u %d v %d; F %.5f %.5f m %d %d units %v %v harm %v %v", len(g.tiles), cu, cv, au.F, av.F, au.m, av.m, au.unit, av.unit, au.harm, av.harm)
	}
	// Observations from the tiles; with a model G the whole periods of
	// each tile are re-chosen from G's prediction (undoing unwrap slips).
	build := func(G *mat3, all bool) []obs {
		var os []obs
		for i := range g.tiles {
			t := &g.tiles[i]
			if t.n == 0 {
				continue
			}
			x, y := t.sx/t.n, t.sy/t.n
			// Each observation sits where its phase holds: along its own
			// axis at the window's effective centre, across it at the centroid.
			u := g.c*x + g.s*y
			v := -g.s*x + g.c*y
			for axis, m := range []tileMeasure{mu[i], mv[i]} {
				if !(m.ok || (all && m.good)) {
					continue
				}
				unit := au.unit
				ox, oy := g.c*m.u-g.s*v, g.s*m.u+g.c*v
				if axis == 1 {
					unit = av.unit
					ox, oy = g.c*u-g.s*m.u, g.s*u+g.c*m.u
				}
				q := m.q
				if G != nil {
					X, Y := G.apply(ox, oy)
					pred := X / unit
					if axis == 1 {
						pred = Y / unit
					}
					fr := q - math.Floor(q)
					q = fr + math.Round(pred-fr)
				}
				os = append(os, obs{x: ox, y: oy, val: unit * q, axis: axis, w: m.frac, f: unit * m.F})
			}
		}
		return os
	}
	// Robust fit: drop observations far off (unwrap slips are whole
	// periods; 0.4 of the fundamental separates them).
	robust := func(os []obs) (mat3, []obs, bool) {
		G, ok := fitInverse(os, fewObs(os))
		if !ok {
			return G, os, false
		}
		for pass := 0; pass < 3; pass++ {
			res := make([]float64, len(os))
			for i, o := range os {
				res[i] = obsResidual(G, o)
			}
			lim := math.Max(3*median(res), 0.1)
			lim = math.Min(lim, 0.4*math.Min(au.unit, av.unit))
			kept := os[:0:0]
			for i, o := range os {
				if res[i] <= lim {
					kept = append(kept, o)
				}
			}
			if wk.trace != nil {
				wk.trace("robust pass %d: %d obs, median %.3f, lim %.3f, kept %d", pass, len(os), median(res), lim, len(kept))
			}
			if len(kept) == len(os) {
				break
			}
			G2, ok := fitInverse(kept, fewObs(kept))
			if !ok {
				break
			}
			os, G = kept, G2
		}
		return G, os, true
	}
	var os0 []obs
	if seed != nil {
		// The seed chooses the whole periods on the axes it was asked
		// for; the other axis keeps its unwrapped tiles.
		for _, o := range build(seed, true) {
			if seedAxis[o.axis] {
				os0 = append(os0, o)
			}
		}
		for _, o := range build(nil, false) {
			if !seedAxis[o.axis] {
				os0 = append(os0, o)
			}
		}
	} else {
		os0 = build(nil, false)
	}
	G, os, ok := robust(os0)
	if !ok {
		return gridModel{}, false
	}
	for it := 0; it < 2; it++ {
		G2, os2, ok := robust(build(&G, true))
		if !ok || len(os2) < len(os)*3/4 {
			break
		}
		G, os = G2, os2
	}
	affine := fewObs(os)
	if !affine {
		X0, X1, Y0, Y1 := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
		for _, o := range os {
			X, Y := G.apply(o.x, o.y)
			X0, X1, Y0, Y1 = min(X0, X), max(X1, X), min(Y0, Y), max(Y1, Y)
		}
		if H, ok := G.inv(); ok && math.Hypot(H[6]*(X1-X0), H[7]*(Y1-Y0)) < 0.003 {
			if Ga, ok := fitInverse(os, true); ok {
				G = Ga
			}
		}
	}
	H, ok := G.inv()
	if !ok {
		return gridModel{}, false
	}
	if math.Abs(H[6]) < 1e-12 && math.Abs(H[7]) < 1e-12 {
		H[6], H[7] = 0, 0
	}
	gm := gridModel{H: H, unitX: au.unit, unitY: av.unit, tiles: len(os)}
	gm.X0, gm.Y0 = math.Inf(1), math.Inf(1)
	gm.X1, gm.Y1 = math.Inf(-1), math.Inf(-1)
	var ss float64
	for _, o := range os {
		X, Y := G.apply(o.x, o.y)
		gm.X0, gm.X1 = min(gm.X0, X), max(gm.X1, X)
		gm.Y0, gm.Y1 = min(gm.Y0, Y), max(gm.Y1, Y)
		r := obsResidual(G, o)
		ss += r * r
	}
	gm.rmsMM = math.Sqrt(ss / float64(len(os)))
	gm.scaleErr = scaleAgreement(G, os, g.c, g.s)
	// Tile half-size in mm widens the extent to the tiles' edges.
	halfX := float64(ts) / 2 * au.F * au.unit
	halfY := float64(ts) / 2 * av.F * av.unit
	gm.X0 -= halfX
	gm.X1 += halfX
	gm.Y0 -= halfY
	gm.Y1 += halfY
	gm.perspTerms = math.Hypot(H[6]*(gm.X1-gm.X0), H[7]*(gm.Y1-gm.Y0))
	// Confidence: enough tiles, small residual, sharp spectral peaks.
	c := 1.0
	c *= math.Min(1, float64(len(os))/24)
	c *= math.Exp(-gm.rmsMM / 0.3)
	c *= math.Min(1, math.Min(au.prom, av.prom)/20)
	gm.conf = math.Max(0, math.Min(1, c))
	return gm, true
}

// median is stats.Median (NaN for an empty a), under the name the
// package's files use.
func median(a []float64) float64 { return stats.Median(a) }

// jacobian returns the image-space vectors of one mm along X and along Y
// at paper point (X, Y).
func jacobian(h mat3, X, Y float64) (ex, ey [2]float64) {
	const d = 0.5
	x0, y0 := h.apply(X-d, Y)
	x1, y1 := h.apply(X+d, Y)
	ex = [2]float64{(x1 - x0) / (2 * d), (y1 - y0) / (2 * d)}
	x0, y0 = h.apply(X, Y-d)
	x1, y1 = h.apply(X, Y+d)
	ey = [2]float64{(x1 - x0) / (2 * d), (y1 - y0) / (2 * d)}
	return
}

// fewObs says the observations cannot pin the perspective terms: under
// 24 in all, or under 10 on either axis.
func fewObs(os []obs) bool {
	var n [2]int
	for _, o := range os {
		n[o.axis]++
	}
	return len(os) < 24 || n[0] < 10 || n[1] < 10
}

// sparseGridOK says whether at least a fifth of the whole tiles carry the
// grid on each axis.
func sparseGridOK(g *gridScan, mu, mv []tileMeasure) bool {
	full, cu, cv := 0, 0, 0
	for i := range g.tiles {
		if !g.fullTile(&g.tiles[i]) {
			continue
		}
		full++
		if mu[i].ok {
			cu++
		}
		if mv[i].ok {
			cv++
		}
	}
	return 5*cu >= full && 5*cv >= full
}
