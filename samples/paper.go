package samples

import (
	"image"
	"image/color"
	"math"
)

// lighten blends c toward white by f (0 = c, 1 = white).
func lighten(c color.NRGBA, f float64) color.NRGBA {
	l := func(v uint8) uint8 { return uint8(float64(v) + (255-float64(v))*f + 0.5) }
	return color.NRGBA{l(c.R), l(c.G), l(c.B), 255}
}

// drawGrid prints the 1 mm and 5 mm grid (or the 5 mm lines alone) inside
// the grid rectangle.
func drawGrid(img *image.NRGBA, st Style, g geom) {
	if st.Grid == GridNone {
		return
	}
	major := st.GridColor
	minor := lighten(st.GridColor, 0.45)
	px := g.pxmm
	x0, x1 := int(math.Floor(g.gridX0*px)), int(math.Ceil(g.gridX1*px))
	y0, y1 := int(math.Floor(g.gridY0*px)), int(math.Ceil(g.gridY1*px))
	x0, y0 = max(x0, 0), max(y0, 0)
	x1, y1 = min(x1, img.Rect.Dx()), min(y1, img.Rect.Dy())
	// Line positions: every mm from the 5 mm crossing at (gridOX, gridOY).
	lines := func(o, lo, hi float64) (minorPos, majorPos []float64) {
		k0 := int(math.Floor(lo - o))
		k1 := int(math.Ceil(hi - o))
		for k := k0; k <= k1; k++ {
			p := o + float64(k)
			if p < lo || p > hi {
				continue
			}
			if ((k%5)+5)%5 == 0 {
				majorPos = append(majorPos, p*px)
			} else {
				minorPos = append(minorPos, p*px)
			}
		}
		return
	}
	mxs, Mxs := lines(g.gridOX, g.gridX0, g.gridX1)
	mys, Mys := lines(g.gridOY, g.gridY0, g.gridY1)
	if st.Grid == GridMajor {
		mxs, mys = nil, nil
	}
	if st.Grid == GridDots {
		rMinor := math.Max(st.MinorLineMM*px*0.8, 0.6)
		rMajor := math.Max(st.MajorLineMM*px*0.8, rMinor+0.3)
		all := func(a, b []float64) []float64 { return append(append([]float64{}, a...), b...) }
		isMajor := func(v float64, M []float64) bool {
			for _, m := range M {
				if math.Abs(m-v) < 1e-6 {
					return true
				}
			}
			return false
		}
		for _, yc := range all(mys, Mys) {
			my := isMajor(yc, Mys)
			for _, xc := range all(mxs, Mxs) {
				if my && isMajor(xc, Mxs) {
					dot(img, xc, yc, rMajor, major)
				} else {
					dot(img, xc, yc, rMinor, minor)
				}
			}
		}
		return
	}
	cover := func(n, off int, pos []float64, wpx float64) []float32 {
		c := make([]float32, n)
		hw := math.Max(wpx, 0.3) / 2
		for _, p := range pos {
			a, b := p-hw, p+hw
			for i := int(math.Floor(a)); i <= int(math.Floor(b)); i++ {
				j := i - off
				if j < 0 || j >= n {
					continue
				}
				ov := math.Min(b, float64(i+1)) - math.Max(a, float64(i))
				if ov > 0 {
					c[j] = float32(math.Min(1, float64(c[j])+ov))
				}
			}
		}
		return c
	}
	w, h := x1-x0, y1-y0
	if w <= 0 || h <= 0 {
		return
	}
	cmx := cover(w, x0, mxs, st.MinorLineMM*px)
	cMx := cover(w, x0, Mxs, st.MajorLineMM*px)
	cmy := cover(h, y0, mys, st.MinorLineMM*px)
	cMy := cover(h, y0, Mys, st.MajorLineMM*px)
	for y := 0; y < h; y++ {
		row := img.Pix[(y0+y)*img.Stride+x0*4:]
		for x := 0; x < w; x++ {
			mi := max(cmx[x], cmy[y])
			ma := max(cMx[x], cMy[y])
			if mi == 0 && ma == 0 {
				continue
			}
			p := row[4*x : 4*x+4]
			if mi > 0 {
				blendPx(p, minor, uint32(mi*255+0.5))
			}
			if ma > 0 {
				blendPx(p, major, uint32(ma*255+0.5))
			}
		}
	}
}

// dot paints an anti-aliased disk.
func dot(img *image.NRGBA, cx, cy, r float64, c color.NRGBA) {
	b := img.Rect
	for y := int(math.Floor(cy - r - 1)); y <= int(math.Ceil(cy+r+1)); y++ {
		if y < b.Min.Y || y >= b.Max.Y {
			continue
		}
		for x := int(math.Floor(cx - r - 1)); x <= int(math.Ceil(cx+r+1)); x++ {
			if x < b.Min.X || x >= b.Max.X {
				continue
			}
			d := math.Hypot(float64(x)+0.5-cx, float64(y)+0.5-cy)
			a := math.Min(1, math.Max(0, r+0.5-d))
			if a > 0 {
				i := img.PixOffset(x, y)
				blendPx(img.Pix[i:i+4], c, uint32(a*255+0.5))
			}
		}
	}
}

// drawLabel prints a lead name at the style's label place for a panel
// starting at x0 (px) with its baseline at base (px).
func drawLabel(img *image.NRGBA, txt *texter, st Style, g geom, name string, col int, x0, base float64) {
	mm := func(v float64) float64 { return v * g.pxmm }
	capH := mm(st.LabelPt * 0.3528 * 0.72) // cap height of the face, about 0.72 em (common practice)
	switch st.LabelPlace {
	case LabelBelow:
		txt.draw(img, x0+mm(1.2), base+mm(0.6*st.GainMMPerMV+1)+capH, name, st.TraceColor)
	case LabelMargin:
		if col == 0 {
			// In the white before the row: ends 1 mm left of the grid or
			// of the pulse, whichever comes first, never off the page.
			right := mm(st.MarginsMM[0]) - mm(1)
			x := math.Max(mm(0.5), right-txt.width(name))
			txt.draw(img, x, base+capH/2, name, st.TraceColor)
			return
		}
		txt.draw(img, x0+mm(1.2), base-mm(0.75*st.GainMMPerMV+1), name, st.TraceColor)
	case LabelInside:
		txt.draw(img, x0+mm(0.3), base-mm(0.8), name, st.TraceColor)
	default:
		txt.draw(img, x0+mm(1.2), base-mm(0.75*st.GainMMPerMV+1), name, st.TraceColor)
	}
}
