package calib

import (
	"math"
	"sort"
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
}

// measureGrid finds the grid, or returns ok=false when there is none.
func measureGrid(wk *work, theta float64) (gridModel, bool) {
	ts := min(max(min(wk.w, wk.h)/5, 128), 250)
	if min(wk.w, wk.h) < 2*64 {
		return gridModel{}, false
	}
	if min(wk.w, wk.h) < 2*ts {
		ts = min(wk.w, wk.h) / 2
	}
	g := scanTiles(wk, theta, ts)
	au := analyzeAxis(g, true)
	av := analyzeAxis(g, false)
	if !au.ok || !av.ok {
		return gridModel{}, false
	}
	mu := measureTiles(g, &au, true)
	mv := measureTiles(g, &av, false)
	unwrap(g, mu)
	unwrap(g, mv)

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
	unitFor := func(af axisFit, n float64) float64 {
		if af.m == 5 {
			return 5
		}
		for _, h := range af.harm {
			if h == 5 && len(af.harm) >= 3 {
				return 5
			}
		}
		if n < 100 {
			return 5
		}
		return 1
	}
	nu := spanPeriods(mu, true, au.F)
	nv := spanPeriods(mv, false, av.F)
	au.unit = unitFor(au, nu)
	av.unit = unitFor(av, nv)
	ppu := 1 / (au.F * au.unit)
	ppv := 1 / (av.F * av.unit)
	if r := ppu / ppv; r > 2.9 || r < 1/2.9 {
		// One axis took the wrong unit: trust the one with 5 mm structure.
		strongU := au.m == 5 || len(au.harm) > len(av.harm)
		if strongU {
			av.unit = au.unit * map[bool]float64{true: 1.0 / 5, false: 5}[r < 1]
			if av.unit != 1 && av.unit != 5 {
				return gridModel{}, false
			}
		} else {
			au.unit = av.unit * map[bool]float64{true: 5, false: 1.0 / 5}[r < 1]
			if au.unit != 1 && au.unit != 5 {
				return gridModel{}, false
			}
		}
	}

	if dbgGrid != nil {
		cu, cv := 0, 0
		for i := range mu {
			if mu[i].ok {
				cu++
			}
			if mv[i].ok {
				cv++
			}
		}
		dbgGrid("tiles %d ok u %d v %d; F %.5f %.5f m %d %d units %v %v harm %v %v", len(g.tiles), cu, cv, au.F, av.F, au.m, av.m, au.unit, av.unit, au.harm, av.harm)
	}
	var cs []corr
	for i := range g.tiles {
		if !mu[i].ok || !mv[i].ok {
			continue
		}
		t := &g.tiles[i]
		x, y := t.sx/t.n, t.sy/t.n
		u := g.c*x + g.s*y
		v := -g.s*x + g.c*y
		cs = append(cs, corr{
			X: au.unit * (au.F*u + mu[i].o),
			Y: av.unit * (av.F*v + mv[i].o),
			x: x, y: y, w: math.Min(mu[i].frac, mv[i].frac),
		})
	}
	if len(cs) < 4 {
		return gridModel{}, false
	}
	affine := len(cs) < 12
	H, ok := fitHomography(cs, affine)
	if !ok {
		return gridModel{}, false
	}
	// Robust pass: drop points far off the first fit (unwrap slips).
	pxPerMM := 1 / (au.F * au.unit)
	for pass := 0; pass < 2; pass++ {
		res := make([]float64, len(cs))
		for i, c := range cs {
			res[i] = residual(H, c)
		}
		med := median(res)
		lim := math.Max(3*med, 0.25*pxPerMM)
		kept := cs[:0:0]
		for i, c := range cs {
			if res[i] <= lim {
				kept = append(kept, c)
			}
		}
		if len(kept) < 4 || len(kept) == len(cs) {
			break
		}
		cs = kept
		if H2, ok := fitHomography(cs, len(cs) < 12); ok {
			H = H2
		}
	}
	gm := gridModel{H: H, unitX: au.unit, unitY: av.unit, tiles: len(cs)}
	gm.X0, gm.Y0 = math.Inf(1), math.Inf(1)
	gm.X1, gm.Y1 = math.Inf(-1), math.Inf(-1)
	var ss float64
	for _, c := range cs {
		gm.X0, gm.X1 = min(gm.X0, c.X), max(gm.X1, c.X)
		gm.Y0, gm.Y1 = min(gm.Y0, c.Y), max(gm.Y1, c.Y)
		r := residual(H, c)
		ss += r * r
	}
	gm.rmsMM = math.Sqrt(ss/float64(len(cs))) / pxPerMM
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
	c *= math.Min(1, float64(len(cs))/12)
	c *= math.Exp(-gm.rmsMM / 0.3)
	c *= math.Min(1, math.Min(au.prom, av.prom)/20)
	gm.conf = math.Max(0, math.Min(1, c))
	return gm, true
}

func median(a []float64) float64 {
	if len(a) == 0 {
		return 0
	}
	b := append([]float64(nil), a...)
	sort.Float64s(b)
	n := len(b)
	if n%2 == 1 {
		return b[n/2]
	}
	return (b[n/2-1] + b[n/2]) / 2
}

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

// dbgGrid, when set by a test, receives a line about each grid search.
var dbgGrid func(format string, a ...any)
