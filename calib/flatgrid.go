package calib

import (
	"image"
	"math"
)

// sheetGrid finds the grid on the work image flattened by the sheet's
// outline; the model returned maps mm to work px like any other.
func sheetGrid(wk *work) (gridModel, bool) {
	q, ok := sheetQuad(wk)
	if !ok {
		return gridModel{}, false
	}
	M, W, H, ok := sheetFrame(q, wk)
	if !ok {
		return gridModel{}, false
	}
	g, ok := measureFlat(wk, M, W, H)
	if wk.trace != nil {
		wk.trace("sheet grid: %d×%d flat, grid found %v, rms %.3f mm on %d tiles", W, H, ok, g.rmsMM, g.tiles)
	}
	if !ok {
		return gridModel{}, false
	}
	g.sheet = &q
	return g, true
}

// measureFlat measures the grid on the work image resampled through M
// (flat px → work px) at W×H and returns the model composed with M, so
// that it maps mm to work px.
func measureFlat(wk *work, M mat3, W, H int) (gridModel, bool) {
	dmin, err1 := warpPlane(wk.dmin, wk.w, wk.h, M, W, H)
	dmax, err2 := warpPlane(wk.dmax, wk.w, wk.h, M, W, H)
	if err1 != nil || err2 != nil {
		return gridModel{}, false
	}
	g, ok := measureGrid(&work{w: W, h: H, k: wk.k, dmin: dmin, dmax: dmax, trace: wk.trace}, 0)
	if !ok {
		return g, false
	}
	g.H = M.mul(g.H)
	g.perspTerms = math.Hypot(g.H[6]*(g.X1-g.X0), g.H[7]*(g.Y1-g.Y0))
	return g, true
}

// clearOffSheet blanks the ink outside the sheet's outline, brought in by
// margin px: the edge between a sheet and the table behind it is a long
// straight line that reads as a trace. q is in the ink map's own px.
func clearOffSheet(ink *image.Gray, q [4][2]float64, margin float64) {
	sign := 1.0
	if quadArea(q) < 0 {
		sign = -1
	}
	type edge struct{ nx, ny, c float64 } // inside where nx·x + ny·y + c ≥ 0
	var es [4]edge
	for i := range q {
		a, b := q[i], q[(i+1)%4]
		dx, dy := b[0]-a[0], b[1]-a[1]
		l := math.Hypot(dx, dy)
		if l == 0 {
			return
		}
		// Clockwise on the picture (y down): the inside lies to the right
		// of each edge, at (−dy, dx).
		nx, ny := -dy/l*sign, dx/l*sign
		es[i] = edge{nx, ny, -(nx*a[0] + ny*a[1]) - margin}
	}
	b := ink.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		row := ink.Pix[(y-b.Min.Y)*ink.Stride:]
		for x := b.Min.X; x < b.Max.X; x++ {
			for _, e := range es {
				if e.nx*float64(x)+e.ny*float64(y)+e.c < 0 {
					row[x-b.Min.X] = 0
					break
				}
			}
		}
	}
}

// secondPass measures the grid again on the work image resampled through
// the first model (a photo seen at a slant: in the flattened frame every
// tile's lines run straight, so their phase is sharp) and composes the two
// models; it keeps the first when the second fits worse.
func secondPass(wk *work, gm gridModel) gridModel {
	ex, ey := jacobian(gm.H, (gm.X0+gm.X1)/2, (gm.Y0+gm.Y1)/2)
	sw := (math.Hypot(ex[0], ex[1]) + math.Hypot(ey[0], ey[1])) / 2
	W, H := int((gm.X1-gm.X0)*sw), int((gm.Y1-gm.Y0)*sw)
	if W < 256 || H < 256 || W*H > 3*wk.w*wk.h {
		return gm
	}
	M := gm.H.mul(mat3{1 / sw, 0, gm.X0, 0, 1 / sw, gm.Y0, 0, 0, 1}) // flat px → work px
	return remeasure(wk, gm, M, W, H)
}

// remeasure measures the grid on the work image resampled to W×H through
// M (flat px → work px), where the grid's lines should run straight, and
// keeps that model when it fits better than gm and confirms its scale.
func remeasure(wk *work, gm gridModel, M mat3, W, H int) gridModel {
	g2, ok := measureFlat(wk, M, W, H)
	if !ok || g2.quality() <= gm.quality() {
		return gm
	}
	// The flattened frame must confirm the first scale (a 1 mm / 5 mm mix-up
	// fits as well as the truth).
	fx, fy := jacobian(g2.H, (g2.X0+g2.X1)/2, (g2.Y0+g2.Y1)/2)
	ex, ey := jacobian(gm.H, (gm.X0+gm.X1)/2, (gm.Y0+gm.Y1)/2)
	rx := math.Hypot(fx[0], fx[1]) / math.Hypot(ex[0], ex[1])
	ry := math.Hypot(fy[0], fy[1]) / math.Hypot(ey[0], ey[1])
	// Unless the first model hardly fits at all (a harmonic taken for the
	// 5 mm period, one axis lost) and the flattened frame fits closely:
	// then the second scale is the one to believe, but for a fivefold
	// ratio (the 1 mm / 5 mm question, which a close fit cannot settle).
	poorFirst := gm.rmsMM > 0.15 && g2.rmsMM < 0.05
	fivefold := func(r float64) bool { return (r > 4 && r < 6) || (r > 1.0/6 && r < 0.25) }
	agree := func(r float64) bool { return math.Abs(r-1) <= 0.15 || (poorFirst && !fivefold(r)) }
	if wk.trace != nil {
		wk.trace("remeasured: rms %.3f → %.3f mm, scale ratio %.3f × %.3f", gm.rmsMM, g2.rmsMM, rx, ry)
	}
	if !agree(rx) || !agree(ry) {
		return gm
	}
	return g2
}
