package samples

import (
	"errors"
	"image"
	"image/color"
	"math"

	"gonum.org/v1/gonum/mat"
)

// jacobianOf returns the images of the unit x and y steps at (x, y)
// under any map.
func jacobianOf(f func(x, y float64) (float64, float64), x, y float64) (jx, jy, kx, ky float64) {
	const e = 0.5
	x0, y0 := f(x-e, y)
	x1, y1 := f(x+e, y)
	x2, y2 := f(x, y-e)
	x3, y3 := f(x, y+e)
	return (x1 - x0) / (2 * e), (y1 - y0) / (2 * e), (x3 - x2) / (2 * e), (y3 - y2) / (2 * e)
}

// Apply maps (x, y) by the homography h.
func Apply(h [9]float64, x, y float64) (float64, float64) {
	w := h[6]*x + h[7]*y + h[8]
	return (h[0]*x + h[1]*y + h[2]) / w, (h[3]*x + h[4]*y + h[5]) / w
}

// jacobian returns the images of the unit x and y steps at (x, y).
func jacobian(h [9]float64, x, y float64) (jx, jy, kx, ky float64) {
	const e = 0.5
	x0, y0 := Apply(h, x-e, y)
	x1, y1 := Apply(h, x+e, y)
	x2, y2 := Apply(h, x, y-e)
	x3, y3 := Apply(h, x, y+e)
	return (x1 - x0) / (2 * e), (y1 - y0) / (2 * e), (x3 - x2) / (2 * e), (y3 - y2) / (2 * e)
}

func mul3(a, b [9]float64) [9]float64 {
	var c [9]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			for k := 0; k < 3; k++ {
				c[3*i+j] += a[3*i+k] * b[3*k+j]
			}
		}
	}
	return c
}

// Invert returns the inverse of a 3×3 map as Apply takes it (row-major,
// homogeneous); ok is false when it is singular.
func Invert(m [9]float64) ([9]float64, bool) {
	a, b, c, d, e, f, g, h, i := m[0], m[1], m[2], m[3], m[4], m[5], m[6], m[7], m[8]
	A, B, C := e*i-f*h, -(d*i - f*g), d*h-e*g
	det := a*A + b*B + c*C
	if math.Abs(det) < 1e-15 {
		return m, false
	}
	r := [9]float64{A, -(b*i - c*h), b*f - c*e, B, a*i - c*g, -(a*f - c*d), C, -(a*h - b*g), a*e - b*d}
	for k := range r {
		r[k] /= det
	}
	return r, true
}

// quadHomography solves for the homography taking src[k] to dst[k]
// (h8 = 1; the eight linear equations by gonum's LU).
func quadHomography(src, dst [4][2]float64) ([9]float64, error) {
	A := mat.NewDense(8, 8, nil)
	b := mat.NewVecDense(8, nil)
	for k := 0; k < 4; k++ {
		x, y, u, v := src[k][0], src[k][1], dst[k][0], dst[k][1]
		A.SetRow(2*k, []float64{x, y, 1, 0, 0, 0, -u * x, -u * y})
		A.SetRow(2*k+1, []float64{0, 0, 0, x, y, 1, -v * x, -v * y})
		b.SetVec(2*k, u)
		b.SetVec(2*k+1, v)
	}
	var sol mat.VecDense
	if err := sol.SolveVec(A, b); err != nil {
		return Identity, errors.New("degenerate page corners")
	}
	var h [9]float64
	for i := 0; i < 8; i++ {
		h[i] = sol.AtVec(i)
	}
	h[8] = 1
	return h, nil
}

// bilinearOrBg sets p's colour to src sampled bilinearly at (u, v),
// where neighbours outside src contribute bg(x, y), the background at the
// destination pixel (x, y).
func bilinearOrBg(p []uint8, src *image.NRGBA, u, v float64, bg func(x, y int) color.NRGBA, x, y int) {
	sw, sh := src.Rect.Dx(), src.Rect.Dy()
	ix, iy := int(math.Floor(u)), int(math.Floor(v))
	var acc [3]float64
	var inside float64
	for k := 0; k < 4; k++ {
		xx, yy := ix+k&1, iy+k>>1
		if xx < 0 || yy < 0 || xx >= sw || yy >= sh {
			continue
		}
		wt := (1 - math.Abs(float64(xx)-u)) * (1 - math.Abs(float64(yy)-v))
		o := yy*src.Stride + xx*4
		acc[0] += wt * float64(src.Pix[o])
		acc[1] += wt * float64(src.Pix[o+1])
		acc[2] += wt * float64(src.Pix[o+2])
		inside += wt
	}
	if inside < 1-1e-9 {
		c := bg(x, y)
		o := 1 - inside
		acc[0] += o * float64(c.R)
		acc[1] += o * float64(c.G)
		acc[2] += o * float64(c.B)
	}
	p[0], p[1], p[2] = clamp8(acc[0]), clamp8(acc[1]), clamp8(acc[2])
}

// warp resamples src through homography h (src px -> dst px) bilinearly
// into a w × h image; points outside the page take bg.
func warp(src *image.NRGBA, hm [9]float64, w, h int, bg func(x, y int) color.NRGBA) (*image.NRGBA, error) {
	if float64(w)*float64(h) > 80e6 {
		return nil, errors.New("samples: warped image would be too large")
	}
	inv, ok := Invert(hm)
	if !ok {
		return nil, errors.New("samples: singular page transform")
	}
	dst := image.NewNRGBA(image.Rect(0, 0, w, h))
	sw, sh := src.Rect.Dx(), src.Rect.Dy()
	stride := src.Stride
	parallelRows(h, func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := dst.Pix[y*dst.Stride:]
			fy := float64(y) + 0.5
			// Homogeneous source coordinates step linearly along a row.
			un := inv[0]*0.5 + inv[1]*fy + inv[2]
			vn := inv[3]*0.5 + inv[4]*fy + inv[5]
			wn := inv[6]*0.5 + inv[7]*fy + inv[8]
			for x := 0; x < w; x++ {
				u, v := un/wn-0.5, vn/wn-0.5
				un += inv[0]
				vn += inv[3]
				wn += inv[6]
				p := row[4*x : 4*x+4]
				p[3] = 255
				if u >= 0 && v >= 0 && u < float64(sw-1) && v < float64(sh-1) {
					// Inside: fixed-point bilinear.
					ix, iy := int(u), int(v)
					fx, fy := uint32((u-float64(ix))*256), uint32((v-float64(iy))*256)
					o := iy*stride + ix*4
					s00, s10 := src.Pix[o:o+3], src.Pix[o+4:o+7]
					s01, s11 := src.Pix[o+stride:o+stride+3], src.Pix[o+stride+4:o+stride+7]
					for c := 0; c < 3; c++ {
						top := uint32(s00[c])*(256-fx) + uint32(s10[c])*fx
						bot := uint32(s01[c])*(256-fx) + uint32(s11[c])*fx
						p[c] = uint8((top*(256-fy) + bot*fy + 32768) >> 16)
					}
					continue
				}
				// At or beyond the page edge: neighbours outside the page
				// contribute the background.
				bilinearOrBg(p, src, u, v, bg, x, y)
			}
		}
	})
	return dst, nil
}

// Unwarp samples pic, a picture of a printout whose truth is t, back onto
// the clean render's pixel grid (w × h px at t.CleanPxPerMM): each clean
// pixel's centre is carried to the picture by t.ToImage (the paper's
// bend, then PageToImage) and read there bilinearly; white where it falls
// outside the picture. It is the flattened page an ideal calibration
// would give, for scoring the tracer apart from calib.
func Unwarp(pic *image.NRGBA, t Truth, w, h int) *image.NRGBA {
	out := image.NewNRGBA(image.Rect(0, 0, w, h))
	sw, sh := pic.Rect.Dx(), pic.Rect.Dy()
	parallelRows(h, func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			for x := 0; x < w; x++ {
				u, v := t.ToImage(float64(x)+0.5, float64(y)+0.5)
				u, v = u-0.5, v-0.5
				i, j := int(math.Floor(u)), int(math.Floor(v))
				fx, fy := u-float64(i), v-float64(j)
				o := out.Pix[y*out.Stride+4*x:]
				if i < 0 || j < 0 || i+1 >= sw || j+1 >= sh {
					o[0], o[1], o[2], o[3] = 255, 255, 255, 255
					continue
				}
				for c := 0; c < 4; c++ {
					a := float64(pic.Pix[j*pic.Stride+4*i+c])
					b := float64(pic.Pix[j*pic.Stride+4*(i+1)+c])
					cc := float64(pic.Pix[(j+1)*pic.Stride+4*i+c])
					d := float64(pic.Pix[(j+1)*pic.Stride+4*(i+1)+c])
					o[c] = uint8(a*(1-fx)*(1-fy) + b*fx*(1-fy) + cc*(1-fx)*fy + d*fx*fy + 0.5)
				}
			}
		}
	})
	return out
}

// ScalesAt returns the page's true scales (px/mm along the paper's time
// and amplitude axes) and rotation (degrees, counter-clockwise) at image
// point (x, y), from the page-to-image map: under perspective they change
// across the page, and calib states them where it measured them. A page
// bent off its plane (Bend) has no single map; its global truth is
// returned.
func (t Truth) ScalesAt(x, y float64) (pxPerMMX, pxPerMMY, rotDeg float64) {
	inv, ok := Invert(t.PageToImage)
	if !ok || t.Bend != nil || t.CleanPxPerMM <= 0 {
		return t.PxPerMMX, t.PxPerMMY, t.RotationDeg
	}
	cx, cy := Apply(inv, x, y)
	h := t.CleanPxPerMM / 2
	x0, y0 := Apply(t.PageToImage, cx-h, cy)
	x1, y1 := Apply(t.PageToImage, cx+h, cy)
	x2, y2 := Apply(t.PageToImage, cx, cy-h)
	x3, y3 := Apply(t.PageToImage, cx, cy+h)
	return math.Hypot(x1-x0, y1-y0), math.Hypot(x3-x2, y3-y2), -math.Atan2(y1-y0, x1-x0) * 180 / math.Pi
}
