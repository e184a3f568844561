package samples

import (
	"image"
	"image/color"
	"math"
	"math/rand"
)

// Bend is a smooth, non-planar warp of the paper in clean-render px: one
// or both short edges curl up off the table, as thermal paper does, and
// the camera above sees the lifted paper foreshortened and pushed out
// from its principal point by parallax. The fold line bows along the
// edge, so the edges of the picture are curved, not straight.
type Bend struct {
	W, H        float64  // page size, px
	Left, Right EdgeCurl // zero Radius: that edge lies flat
	// CamX, CamY is the point of the page under the camera, CamH the
	// camera's height above the table, px.
	CamX, CamY, CamH float64
}

// EdgeCurl is one curled edge.
type EdgeCurl struct {
	Start  float64 // distance of the fold line from the edge at mid-height, px
	Bow    float64 // how much nearer the edge the fold line lies at the top and bottom, px
	Radius float64 // radius of the curl, px
}

// fold returns the fold line's distance from the edge at height y.
func (e EdgeCurl) fold(y, h float64) float64 {
	v := 2*y/h - 1
	return e.Start - e.Bow*v*v
}

// lift returns, for arc length a past the fold, the foreshortened length
// and the height above the table.
func (e EdgeCurl) lift(a float64) (along, z float64) {
	if a <= 0 || e.Radius <= 0 {
		return a, 0
	}
	th := a / e.Radius
	return e.Radius * math.Sin(th), e.Radius * (1 - math.Cos(th))
}

// EdgeAngleDeg is how steeply the paper rises at its very edge.
func (e EdgeCurl) EdgeAngleDeg() float64 {
	if e.Radius <= 0 {
		return 0
	}
	return e.Start / e.Radius * 180 / math.Pi
}

// surface returns the flat-view position (before parallax) and the
// height of paper point (x, y).
func (b *Bend) surface(x, y float64) (fx, z float64) {
	fx = x
	if b.Right.Radius > 0 {
		s0 := b.W - b.Right.fold(y, b.H)
		if x > s0 {
			al, zz := b.Right.lift(x - s0)
			return s0 + al, zz
		}
	}
	if b.Left.Radius > 0 {
		s0 := b.Left.fold(y, b.H)
		if x < s0 {
			al, zz := b.Left.lift(s0 - x)
			return s0 - al, zz
		}
	}
	return fx, 0
}

// Forward maps a paper point to where the camera sees it, in page px.
func (b *Bend) Forward(x, y float64) (float64, float64) {
	fx, z := b.surface(x, y)
	f := b.CamH / (b.CamH - z)
	return b.CamX + (fx-b.CamX)*f, b.CamY + (y-b.CamY)*f
}

// Inverse maps a seen point back to the paper (a few fixed-point steps;
// the parallax is a few per cent, so they converge to far below a pixel).
func (b *Bend) Inverse(u, v float64) (float64, float64) {
	x, y := u, v
	for it := 0; it < 24; it++ {
		_, z := b.surface(x, y)
		f := b.CamH / (b.CamH - z)
		qx, qy := b.CamX+(u-b.CamX)/f, b.CamY+(v-b.CamY)/f
		y = qy
		x = qx
		if b.Right.Radius > 0 {
			s0 := b.W - b.Right.fold(y, b.H)
			if qx > s0 {
				x = s0 + b.Right.Radius*math.Asin(math.Min(1, (qx-s0)/b.Right.Radius))
			}
		}
		if b.Left.Radius > 0 {
			s0 := b.Left.fold(y, b.H)
			if qx < s0 {
				x = s0 - b.Left.Radius*math.Asin(math.Min(1, (s0-qx)/b.Left.Radius))
			}
		}
	}
	return x, y
}

// tilt returns the paper's angle to the table at (x, y), radians.
func (b *Bend) tilt(x, y float64) float64 {
	if b.Right.Radius > 0 {
		if a := x - (b.W - b.Right.fold(y, b.H)); a > 0 {
			return a / b.Right.Radius
		}
	}
	if b.Left.Radius > 0 {
		if a := b.Left.fold(y, b.H) - x; a > 0 {
			return a / b.Left.Radius
		}
	}
	return 0
}

// newBend draws a curl of strength s (0..1) for a W × H page: edges
// rising 45–62° at their ends (the curled sheets seen in practice, from
// memory), one edge or both.
func newBend(W, H, s float64, rng *rand.Rand) *Bend {
	b := &Bend{W: W, H: H, CamX: W * (0.4 + 0.2*rng.Float64()), CamY: H * (0.4 + 0.2*rng.Float64()), CamH: 1.6 * math.Max(W, H)}
	edge := func() EdgeCurl {
		ang := (45 + 17*rng.Float64()) * math.Pi / 180
		start := W * (0.05 + 0.1*s*rng.Float64() + 0.03*s)
		return EdgeCurl{Start: start, Bow: start * (0.1 + 0.35*rng.Float64()), Radius: start / ang}
	}
	switch rng.Intn(3) {
	case 0:
		b.Left = edge()
	case 1:
		b.Right = edge()
	default:
		b.Left, b.Right = edge(), edge()
	}
	return b
}

// shadeCurl darkens (or lights) the lifted paper by its tilt to the lamp.
func shadeCurl(img *image.NRGBA, b *Bend, lampSide float64) {
	W := img.Rect.Dx()
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride:]
			fy := float64(y) + 0.5
			for x := 0; x < W; x++ {
				th := b.tilt(float64(x)+0.5, fy)
				if th == 0 {
					continue
				}
				// Lambert-like: light from one side, the edge turned away
				// from it darker.
				side := 1.0
				if float64(x) < b.W/2 {
					side = -1
				}
				f := math.Cos(th) * (1 + 0.25*lampSide*side*math.Sin(th))
				f = math.Min(1.08, math.Max(0.45, f))
				p := row[4*x : 4*x+3]
				for c := range p {
					p[c] = clamp8(float64(p[c]) * f)
				}
			}
		}
	})
}

// warpFunc resamples src into a w × h image through inv, which maps an
// output pixel centre to source px (continuous). inv is evaluated on a
// grid every 8 px and interpolated between (the maps used are smooth:
// the error is far below a pixel).
func warpFunc(src *image.NRGBA, w, h int, inv func(x, y float64) (float64, float64), bg func(x, y int) color.NRGBA) *image.NRGBA {
	const step = 8
	gw, gh := w/step+2, h/step+2
	gu := make([]float64, gw*gh)
	gv := make([]float64, gw*gh)
	for j := 0; j < gh; j++ {
		for i := 0; i < gw; i++ {
			gu[j*gw+i], gv[j*gw+i] = inv(float64(i*step), float64(j*step))
		}
	}
	dst := image.NewNRGBA(image.Rect(0, 0, w, h))
	parallelRows(h, func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			fy := (float64(y) + 0.5) / step
			j := int(fy)
			ty := fy - float64(j)
			row := dst.Pix[y*dst.Stride:]
			for x := 0; x < w; x++ {
				fx := (float64(x) + 0.5) / step
				i := int(fx)
				tx := fx - float64(i)
				k := j*gw + i
				u := (gu[k]*(1-tx)+gu[k+1]*tx)*(1-ty) + (gu[k+gw]*(1-tx)+gu[k+gw+1]*tx)*ty - 0.5
				v := (gv[k]*(1-tx)+gv[k+1]*tx)*(1-ty) + (gv[k+gw]*(1-tx)+gv[k+gw+1]*tx)*ty - 0.5
				p := row[4*x : 4*x+4]
				p[3] = 255
				bilinearOrBg(p, src, u, v, bg, x, y)
			}
		}
	})
	return dst
}

// handShadow darkens a soft hand-shaped region coming in from one edge
// of the frame: a palm and four fingers, with a wide penumbra and a
// slightly blue cast (the shadow is lit by the room, not the lamp).
func handShadow(img *image.NRGBA, strength float64, rng *rand.Rand) {
	W, H := float64(img.Rect.Dx()), float64(img.Rect.Dy())
	m := math.Min(W, H)
	// Where the arm enters and the direction the hand points.
	var ex, ey, dx, dy float64
	switch rng.Intn(4) {
	case 0:
		ex, ey, dx, dy = W*(0.2+0.6*rng.Float64()), H, 0, -1
	case 1:
		ex, ey, dx, dy = W*(0.2+0.6*rng.Float64()), 0, 0, 1
	case 2:
		ex, ey, dx, dy = 0, H*(0.2+0.6*rng.Float64()), 1, 0
	default:
		ex, ey, dx, dy = W, H*(0.2+0.6*rng.Float64()), -1, 0
	}
	a := (rng.Float64() - 0.5) * 0.8
	dx, dy = dx*math.Cos(a)-dy*math.Sin(a), dx*math.Sin(a)+dy*math.Cos(a)
	reach := m * (0.3 + 0.25*rng.Float64())
	palmR := m * (0.09 + 0.04*rng.Float64())
	px, py := ex+dx*reach, ey+dy*reach
	type capsule struct{ ax, ay, bx, by, r float64 }
	caps := []capsule{{ex, ey, px, py, palmR * 0.8}} // the forearm and wrist
	nx, ny := -dy, dx
	for f := 0; f < 4; f++ {
		off := (float64(f) - 1.5) * palmR * 0.55
		l := palmR * (1.1 + 0.3*rng.Float64())
		if f == 0 || f == 3 {
			l *= 0.8
		}
		bx, by := px+nx*off, py+ny*off
		caps = append(caps, capsule{bx, by, bx + dx*(palmR+l) + nx*off*0.3, by + dy*(palmR+l) + ny*off*0.3, palmR * 0.18})
	}
	soft := m * (0.02 + 0.03*rng.Float64())
	// The shapes' box, widened by the penumbra.
	bx0, by0, bx1, by1 := px-palmR, py-palmR, px+palmR, py+palmR
	for _, c := range caps {
		bx0, bx1 = math.Min(bx0, math.Min(c.ax, c.bx)-c.r), math.Max(bx1, math.Max(c.ax, c.bx)+c.r)
		by0, by1 = math.Min(by0, math.Min(c.ay, c.by)-c.r), math.Max(by1, math.Max(c.ay, c.by)+c.r)
	}
	ix0, ix1 := max(0, int(bx0-2*soft)), min(img.Rect.Dx(), int(bx1+2*soft)+1)
	iy0, iy1 := max(0, int(by0-2*soft)), min(img.Rect.Dy(), int(by1+2*soft)+1)
	if ix1 <= ix0 || iy1 <= iy0 {
		return
	}
	parallelRows(iy1-iy0, func(y0, y1 int) {
		for y := y0 + iy0; y < y1+iy0; y++ {
			row := img.Pix[y*img.Stride:]
			fy := float64(y) + 0.5
			for x := ix0; x < ix1; x++ {
				fx := float64(x) + 0.5
				d := math.Hypot(fx-px, fy-py) - palmR
				for _, c := range caps {
					vx, vy := c.bx-c.ax, c.by-c.ay
					t := ((fx-c.ax)*vx + (fy-c.ay)*vy) / (vx*vx + vy*vy)
					t = math.Max(0, math.Min(1, t))
					d = math.Min(d, math.Hypot(fx-c.ax-t*vx, fy-c.ay-t*vy)-c.r)
				}
				if d > 2*soft {
					continue
				}
				// Smooth step across the penumbra.
				s := math.Max(0, math.Min(1, 0.5-d/(2*soft)))
				s = s * s * (3 - 2*s)
				f := 1 - strength*s
				p := row[4*x : 4*x+3]
				p[0] = clamp8(float64(p[0]) * f * 0.97)
				p[1] = clamp8(float64(p[1]) * f)
				p[2] = clamp8(float64(p[2]) * math.Min(1, f*1.06))
			}
		}
	})
}

// glare washes out an elliptical spot toward white, its core saturated:
// a lamp's reflection. It returns the spot's box in image px.
func glare(img *image.NRGBA, strength float64, rng *rand.Rand) [4]float64 {
	W, H := float64(img.Rect.Dx()), float64(img.Rect.Dy())
	m := math.Min(W, H)
	cx, cy := W*(0.2+0.6*rng.Float64()), H*(0.2+0.6*rng.Float64())
	rx := m * (0.05 + 0.1*rng.Float64())
	ry := rx * (0.5 + 0.5*rng.Float64())
	a := rng.Float64() * math.Pi
	ca, sa := math.Cos(a), math.Sin(a)
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride:]
			fy := float64(y) + 0.5 - cy
			for x := 0; x < img.Rect.Dx(); x++ {
				fx := float64(x) + 0.5 - cx
				u, v := (fx*ca+fy*sa)/rx, (-fx*sa+fy*ca)/ry
				d2 := u*u + v*v
				if d2 > 9 {
					continue
				}
				g := math.Min(1, 1.4*strength*math.Exp(-d2))
				p := row[4*x : 4*x+3]
				for c := range p {
					p[c] = clamp8(float64(p[c]) + (255-float64(p[c]))*g)
				}
			}
		}
	})
	r := 2 * math.Max(rx, ry)
	return [4]float64{cx - r, cy - r, cx + r, cy + r}
}

// motionBlur averages n samples along a short line of length px at
// angle a (radians): a hand that moved while the shutter was open.
func motionBlur(src *image.NRGBA, length, a float64) *image.NRGBA {
	n := max(2, int(math.Ceil(length))+1)
	dx, dy := math.Cos(a)*length, math.Sin(a)*length
	W, H := src.Rect.Dx(), src.Rect.Dy()
	dst := image.NewNRGBA(src.Rect)
	parallelRows(H, func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := dst.Pix[y*dst.Stride:]
			for x := 0; x < W; x++ {
				var acc [3]float64
				for k := 0; k < n; k++ {
					t := float64(k)/float64(n-1) - 0.5
					u, v := float64(x)+t*dx, float64(y)+t*dy
					ix, iy := int(math.Floor(u)), int(math.Floor(v))
					fx, fy := u-float64(ix), v-float64(iy)
					for q := 0; q < 4; q++ {
						xx, yy := min(max(ix+q&1, 0), W-1), min(max(iy+q>>1, 0), H-1)
						wx, wy := 1-fx, 1-fy
						if q&1 == 1 {
							wx = fx
						}
						if q>>1 == 1 {
							wy = fy
						}
						o := yy*src.Stride + xx*4
						for c := 0; c < 3; c++ {
							acc[c] += wx * wy * float64(src.Pix[o+c])
						}
					}
				}
				p := row[4*x : 4*x+4]
				for c := 0; c < 3; c++ {
					p[c] = clamp8(acc[c] / float64(n))
				}
				p[3] = 255
			}
		}
	})
	return dst
}
