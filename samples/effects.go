package samples

import (
	"image"
	"math"
	"math/rand"
)

// dropGrid maps luma through a levels curve (lo → black, hi → white) and
// drops the colour: a fax's contrast setting under which the pale grid
// vanishes and the dark trace stays.
func dropGrid(img *image.NRGBA, lo, hi float64) {
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride : y*img.Stride+4*img.Rect.Dx()]
			for i := 0; i < len(row); i += 4 {
				l := (299*float64(row[i]) + 587*float64(row[i+1]) + 114*float64(row[i+2])) / 1000
				v := clamp8(255 * (l - lo) / (hi - lo))
				row[i], row[i+1], row[i+2] = v, v, v
			}
		}
	})
}

func greyInPlace(img *image.NRGBA) {
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride : y*img.Stride+4*img.Rect.Dx()]
			for i := 0; i < len(row); i += 4 {
				// ITU-R BT.601 luma weights (common practice).
				l := (299*uint32(row[i]) + 587*uint32(row[i+1]) + 114*uint32(row[i+2]) + 500) / 1000
				row[i], row[i+1], row[i+2] = uint8(l), uint8(l), uint8(l)
			}
		}
	})
}

func fadeInPlace(img *image.NRGBA, f float64) {
	k := uint32(math.Round((1 - f) * 256))
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride : y*img.Stride+4*img.Rect.Dx()]
			for i := 0; i < len(row); i++ {
				if i&3 == 3 {
					continue
				}
				row[i] = uint8(255 - (255-uint32(row[i]))*k/256)
			}
		}
	})
}

// crease darkens a band along a random line with a bright edge on one
// side, like a fold flattened under glass.
func crease(img *image.NRGBA, rng *rand.Rand) {
	W, H := float64(img.Rect.Dx()), float64(img.Rect.Dy())
	var px, py, a float64
	if rng.Intn(2) == 0 { // roughly vertical fold
		px, py, a = W*(0.2+0.6*rng.Float64()), H/2, math.Pi/2+0.15*(rng.Float64()-0.5)
	} else {
		px, py, a = W/2, H*(0.2+0.6*rng.Float64()), 0.1*(rng.Float64()-0.5)
	}
	nx, ny := -math.Sin(a), math.Cos(a)
	width := math.Max(2, math.Min(W, H)*0.004*(0.5+rng.Float64()))
	depth := 0.1 + 0.15*rng.Float64()
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride:]
			for x := 0; x < img.Rect.Dx(); x++ {
				d := ((float64(x)+0.5-px)*nx + (float64(y)+0.5-py)*ny) / width
				if d < -4 || d > 4 {
					continue
				}
				// Dark core, lighter shoulder on the positive side.
				f := 1 - depth*math.Exp(-d*d) + 0.5*depth*math.Exp(-(d-1.5)*(d-1.5))*0.6
				p := row[4*x : 4*x+3]
				for c := range p {
					p[c] = clamp8(float64(p[c]) * f)
				}
			}
		}
	})
}

// unevenLight multiplies by a smooth field: a linear gradient in a
// random direction and a vignette, strength s.
func unevenLight(img *image.NRGBA, s float64, rng *rand.Rand) {
	W, H := float64(img.Rect.Dx()), float64(img.Rect.Dy())
	a := 2 * math.Pi * rng.Float64()
	gx, gy := math.Cos(a), math.Sin(a)
	cx, cy := W*(0.3+0.4*rng.Float64()), H*(0.3+0.4*rng.Float64())
	r2 := (W*W + H*H) / 4
	warm := rng.Float64() * 0.3 // a slightly warm cast under lamps
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride:]
			fy := float64(y) + 0.5
			for x := 0; x < img.Rect.Dx(); x++ {
				fx := float64(x) + 0.5
				g := ((fx/W-0.5)*gx + (fy/H-0.5)*gy) // −0.7..0.7
				v := ((fx-cx)*(fx-cx) + (fy-cy)*(fy-cy)) / r2
				f := 1 - s*(0.35*(g+0.7)+0.45*v)
				p := row[4*x : 4*x+3]
				p[0] = clamp8(float64(p[0]) * f)
				p[1] = clamp8(float64(p[1]) * f * (1 - 0.05*warm))
				p[2] = clamp8(float64(p[2]) * f * (1 - 0.15*warm))
			}
		}
	})
}

func speckle(img *image.NRGBA, frac float64, rng *rand.Rand) {
	W, H := img.Rect.Dx(), img.Rect.Dy()
	n := int(frac * float64(W*H))
	for i := 0; i < n; i++ {
		x, y := rng.Intn(W), rng.Intn(H)
		r := 1 + rng.Intn(2)
		v := uint8(rng.Intn(70))
		if rng.Intn(4) == 0 {
			v = 255 - uint8(rng.Intn(20)) // a white fleck
		}
		for yy := y; yy < min(H, y+r); yy++ {
			for xx := x; xx < min(W, x+r); xx++ {
				o := yy*img.Stride + xx*4
				img.Pix[o], img.Pix[o+1], img.Pix[o+2] = v, v, v
			}
		}
	}
}

func binarize(img *image.NRGBA, thr float64) {
	t := uint32(thr * 1000)
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride : y*img.Stride+4*img.Rect.Dx()]
			for i := 0; i < len(row); i += 4 {
				l := 299*uint32(row[i]) + 587*uint32(row[i+1]) + 114*uint32(row[i+2])
				v := uint8(255)
				if l < t {
					v = 0
				}
				row[i], row[i+1], row[i+2], row[i+3] = v, v, v, 255
			}
		}
	})
}

// gaussKernel returns integer weights (sum 1<<16) for sigma.
func gaussKernel(sigma float64) []int32 {
	if sigma <= 0.05 {
		return []int32{1 << 16}
	}
	r := int(math.Ceil(2.5 * sigma)) // the tails beyond 2.5σ hold 1.2 % of the weight
	w := make([]float64, 2*r+1)
	var s float64
	for i := range w {
		d := float64(i - r)
		w[i] = math.Exp(-d * d / (2 * sigma * sigma))
		s += w[i]
	}
	k := make([]int32, len(w))
	var tot int32
	for i := range w {
		k[i] = int32(math.Round(w[i] / s * 65536))
		tot += k[i]
	}
	k[r] += 65536 - tot
	return k
}

// gaussBlur blurs RGB with separate sigmas across and down.
func gaussBlur(src *image.NRGBA, sx, sy float64) *image.NRGBA {
	W, H := src.Rect.Dx(), src.Rect.Dy()
	kx, ky := gaussKernel(sx), gaussKernel(sy)
	rx, ry := len(kx)/2, len(ky)/2
	tmp := image.NewNRGBA(image.Rect(0, 0, W, H))
	parallelRows(H, func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			in := src.Pix[y*src.Stride:]
			out := tmp.Pix[y*tmp.Stride:]
			for x := 0; x < W; x++ {
				var a0, a1, a2 int32
				if x >= rx && x+rx < W {
					seg := in[4*(x-rx) : 4*(x+rx)+3]
					for k, w := range kx {
						o := 4 * k
						a0 += w * int32(seg[o])
						a1 += w * int32(seg[o+1])
						a2 += w * int32(seg[o+2])
					}
				} else {
					for k, w := range kx {
						xx := min(max(x+k-rx, 0), W-1)
						o := 4 * xx
						a0 += w * int32(in[o])
						a1 += w * int32(in[o+1])
						a2 += w * int32(in[o+2])
					}
				}
				o := 4 * x
				out[o], out[o+1], out[o+2], out[o+3] = uint8((a0+32768)>>16), uint8((a1+32768)>>16), uint8((a2+32768)>>16), 255
			}
		}
	})
	dst := image.NewNRGBA(image.Rect(0, 0, W, H))
	parallelRows(H, func(y0, y1 int) {
		acc := make([]int32, 3*W)
		for y := y0; y < y1; y++ {
			clear(acc)
			for k, w := range ky {
				yy := min(max(y+k-ry, 0), H-1)
				in := tmp.Pix[yy*tmp.Stride:]
				for x := 0; x < W; x++ {
					acc[3*x] += w * int32(in[4*x])
					acc[3*x+1] += w * int32(in[4*x+1])
					acc[3*x+2] += w * int32(in[4*x+2])
				}
			}
			out := dst.Pix[y*dst.Stride:]
			for x := 0; x < W; x++ {
				out[4*x] = uint8((acc[3*x] + 32768) >> 16)
				out[4*x+1] = uint8((acc[3*x+1] + 32768) >> 16)
				out[4*x+2] = uint8((acc[3*x+2] + 32768) >> 16)
				out[4*x+3] = 255
			}
		}
	})
	return dst
}
