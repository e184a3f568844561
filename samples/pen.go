package samples

import (
	"image"
	"image/color"
	"math"
	"math/rand"

	"golang.org/x/image/vector"
)

// inker strokes anti-aliased polylines of a fixed width in one colour
// onto an image, one bounded mask per polyline.
type inker struct {
	dst  *image.NRGBA
	col  color.NRGBA
	hw   float64 // half width, px
	rast *vector.Rasterizer
	mask *image.Alpha
	// layer, when not nil, collects coverage (the larger wins) instead
	// of blending; see useLayer and finish.
	layer  *image.Alpha
	butt   bool
	jitter float64
	rng    *rand.Rand
}

func newInker(dst *image.NRGBA, c color.NRGBA, widthPx float64) *inker {
	return &inker{dst: dst, col: c, hw: math.Max(widthPx, 0.5) / 2, rast: vector.NewRasterizer(1, 1)}
}

// polyline strokes the points with round caps and joins. Points may lie
// outside the image; the stroke is clipped at the image edge only.
func (k *inker) polyline(xs, ys []float64) {
	if len(xs) == 0 {
		return
	}
	xs, ys = k.wobble(xs, ys)
	minX, minY, maxX, maxY := math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)
	for i := range xs {
		minX, maxX = math.Min(minX, xs[i]), math.Max(maxX, xs[i])
		minY, maxY = math.Min(minY, ys[i]), math.Max(maxY, ys[i])
	}
	b := k.dst.Rect
	r := image.Rect(int(math.Floor(minX-k.hw-1)), int(math.Floor(minY-k.hw-1)),
		int(math.Ceil(maxX+k.hw+1)), int(math.Ceil(maxY+k.hw+1))).Intersect(b)
	if r.Empty() {
		return
	}
	w, h := r.Dx(), r.Dy()
	k.rast.Reset(w, h)
	ox, oy := float64(r.Min.X), float64(r.Min.Y)
	hw := k.hw
	disk := func(cx, cy float64) {
		if k.butt {
			return
		}
		// A 12-gon, wound like the segment quads (negative shoelace area
		// in y-down coordinates) so overlapping pieces add up.
		const n = 12
		for j := 0; j <= n; j++ {
			a := -2 * math.Pi * float64(j) / n
			px, py := float32(cx-ox+hw*math.Cos(a)), float32(cy-oy+hw*math.Sin(a))
			if j == 0 {
				k.rast.MoveTo(px, py)
			} else {
				k.rast.LineTo(px, py)
			}
		}
		k.rast.ClosePath()
	}
	disk(xs[0], ys[0])
	var pdx, pdy float64
	for i := 1; i < len(xs); i++ {
		dx, dy := xs[i]-xs[i-1], ys[i]-ys[i-1]
		l := math.Hypot(dx, dy)
		if l < 1e-9 {
			continue
		}
		nx, ny := -dy/l*hw, dx/l*hw
		// Quad p+n, q+n, q−n, p−n (negative shoelace area in y-down).
		k.rast.MoveTo(float32(xs[i-1]+nx-ox), float32(ys[i-1]+ny-oy))
		k.rast.LineTo(float32(xs[i]+nx-ox), float32(ys[i]+ny-oy))
		k.rast.LineTo(float32(xs[i]-nx-ox), float32(ys[i]-ny-oy))
		k.rast.LineTo(float32(xs[i-1]-nx-ox), float32(ys[i-1]-ny-oy))
		k.rast.ClosePath()
		// A round join where the direction turns by more than ~15°.
		if pdx != 0 || pdy != 0 {
			if c := (pdx*dx + pdy*dy) / l; c < 0.966 {
				disk(xs[i-1], ys[i-1])
			}
		}
		pdx, pdy = dx/l, dy/l
	}
	disk(xs[len(xs)-1], ys[len(ys)-1])
	if k.mask == nil || k.mask.Rect.Dx()*k.mask.Rect.Dy() < w*h {
		k.mask = image.NewAlpha(image.Rect(0, 0, w, h))
	} else {
		k.mask.Rect = image.Rect(0, 0, w, h)
		k.mask.Stride = w
		clear(k.mask.Pix[:w*h])
	}
	k.rast.Draw(k.mask, k.mask.Rect, image.Opaque, image.Point{})
	if k.layer != nil {
		for y := 0; y < h; y++ {
			mrow := k.mask.Pix[y*w : y*w+w]
			lrow := k.layer.Pix[(r.Min.Y+y-b.Min.Y)*k.layer.Stride+(r.Min.X-b.Min.X):]
			for x, a := range mrow {
				if a > lrow[x] {
					lrow[x] = a
				}
			}
		}
		return
	}
	c := k.col
	for y := 0; y < h; y++ {
		mrow := k.mask.Pix[y*w : y*w+w]
		drow := k.dst.Pix[(r.Min.Y+y-b.Min.Y)*k.dst.Stride+(r.Min.X-b.Min.X)*4:]
		for x, a := range mrow {
			if a == 0 {
				continue
			}
			blendPx(drow[4*x:4*x+4], c, uint32(a)*uint32(c.A)/255)
		}
	}
}

// blendPx lays colour c with coverage a (0..255) over an opaque pixel.
func blendPx(p []uint8, c color.NRGBA, a uint32) {
	ia := 255 - a
	p[0] = uint8((uint32(p[0])*ia + uint32(c.R)*a + 127) / 255)
	p[1] = uint8((uint32(p[1])*ia + uint32(c.G)*a + 127) / 255)
	p[2] = uint8((uint32(p[2])*ia + uint32(c.B)*a + 127) / 255)
	p[3] = 255
}

// useLayer makes the inker collect coverage in a layer (finish lays it
// on the page) instead of blending each stroke at once: for square pen
// ends, a wobbling pen, a thermal head or ink that spreads.
func (k *inker) useLayer(butt bool, jitterPx float64, seed int64) {
	r := k.dst.Rect
	k.layer = image.NewAlpha(image.Rect(0, 0, r.Dx(), r.Dy()))
	k.butt = butt
	k.jitter = jitterPx
	k.rng = rand.New(rand.NewSource(seed))
}

// wobble adds a slow random offset (an AR(1) walk with the given
// standard deviation) to a polyline's points.
func (k *inker) wobble(xs, ys []float64) ([]float64, []float64) {
	if k.jitter <= 0 || len(xs) == 0 {
		return xs, ys
	}
	ox := make([]float64, len(xs))
	oy := make([]float64, len(ys))
	const a = 0.97 // correlation from one point to the next: the wobble spans tens of samples
	b := math.Sqrt(1 - a*a)
	nx, ny := k.rng.NormFloat64(), k.rng.NormFloat64()
	for i := range xs {
		nx = a*nx + b*k.rng.NormFloat64()
		ny = a*ny + b*k.rng.NormFloat64()
		ox[i] = xs[i] + 0.5*k.jitter*nx
		oy[i] = ys[i] + k.jitter*ny
	}
	return ox, oy
}

// finish lays the collected layer on the page: through a thermal head's
// dot lattice (8 dots per mm, a usual head resolution, from memory) when
// thermal, bled by spreadPx when that is not 0.
func (k *inker) finish(thermal bool, spreadPx, pxmm float64) {
	if k.layer == nil {
		return
	}
	L := k.layer
	W, H := L.Rect.Dx(), L.Rect.Dy()
	if thermal {
		pitch := pxmm / 8
		out := image.NewAlpha(L.Rect)
		// Per column: the lattice cell's centre and whether the pixel
		// falls in the seam after a head line.
		cxs := make([]int, W)
		seam := make([]bool, W)
		for x := 0; x < W; x++ {
			fx := (float64(x) + 0.5) / pitch
			cxs[x] = int(math.Min(float64(W-1), (math.Floor(fx)+0.5)*pitch))
			seam[x] = fx-math.Floor(fx) > 0.85
		}
		parallelRows(H, func(y0, y1 int) {
			for y := y0; y < y1; y++ {
				fy := (float64(y) + 0.5) / pitch
				cy := int(math.Min(float64(H-1), (math.Floor(fy)+0.5)*pitch))
				src := L.Pix[cy*L.Stride : cy*L.Stride+W]
				dst := out.Pix[y*out.Stride : y*out.Stride+W]
				for x := 0; x < W; x++ {
					if src[cxs[x]] < 90 {
						continue
					}
					if seam[x] {
						dst[x] = 110 // a thin pale seam between head lines
					} else {
						dst[x] = 255
					}
				}
			}
		})
		L = out
	}
	if spreadPx > 0.2 {
		L = alphaBlur(L, spreadPx)
		for i, a := range L.Pix {
			L.Pix[i] = uint8(math.Min(255, 1.6*float64(a)))
		}
	}
	c := k.col
	parallelRows(H, func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			lrow := L.Pix[y*L.Stride : y*L.Stride+W]
			drow := k.dst.Pix[y*k.dst.Stride:]
			for x, a := range lrow {
				if a != 0 {
					blendPx(drow[4*x:4*x+4], c, uint32(a)*uint32(c.A)/255)
				}
			}
		}
	})
	k.layer = nil
}

// alphaBlur blurs a coverage layer with a Gaussian of sigma px.
func alphaBlur(src *image.Alpha, sigma float64) *image.Alpha {
	W, H := src.Rect.Dx(), src.Rect.Dy()
	kk := gaussKernel(sigma)
	r := len(kk) / 2
	tmp := image.NewAlpha(src.Rect)
	parallelRows(H, func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			in := src.Pix[y*src.Stride:]
			out := tmp.Pix[y*tmp.Stride:]
			for x := 0; x < W; x++ {
				var acc int32
				for j, w := range kk {
					xx := min(max(x+j-r, 0), W-1)
					acc += w * int32(in[xx])
				}
				out[x] = uint8((acc + 32768) >> 16)
			}
		}
	})
	dst := image.NewAlpha(src.Rect)
	parallelRows(H, func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			out := dst.Pix[y*dst.Stride:]
			for x := 0; x < W; x++ {
				var acc int32
				for j, w := range kk {
					yy := min(max(y+j-r, 0), H-1)
					acc += w * int32(tmp.Pix[yy*tmp.Stride+x])
				}
				out[x] = uint8((acc + 32768) >> 16)
			}
		}
	})
	return dst
}
