package calib

import (
	"encoding/binary"
	"image"
	"math"
)

// work is a box-downsampled copy of the page used for grid analysis: two
// darkness planes (0 = white) made in one pass over the source pixels.
type work struct {
	w, h int
	k    int       // source px per work px along each axis
	dmin []float32 // 255 - min(R,G,B): grid lines of any colour and the ink
	dmax []float32 // 255 - max(R,G,B): mostly the ink (coloured grids vanish)
	// trace, when set, is told each step of the grid search (Options.Trace).
	trace func(format string, a ...any)
}

// workScale picks the integer reduction so the long side is about 1800 px:
// enough for 1 mm lines at ≥ 2.5 px on any page size we accept.
func workScale(b image.Rectangle) int {
	long := max(b.Dx(), b.Dy())
	k := int(math.Round(float64(long) / 1800))
	return max(1, k)
}

// makeWork downsamples src by k. Fast paths for the types our decoders
// return; anything else is converted to NRGBA once.
func makeWork(src image.Image, k int) *work {
	b := src.Bounds()
	w, h := b.Dx()/k, b.Dy()/k
	if w < 1 || h < 1 {
		k = 1
		w, h = b.Dx(), b.Dy()
	}
	wk := &work{w: w, h: h, k: k, dmin: make([]float32, w*h), dmax: make([]float32, w*h)}
	accMin := make([]int32, w)
	accMax := make([]int32, w)
	inv := 1 / float32(k*k)
	var rowFn func(y int, mn, mx []int32)
	switch s := src.(type) {
	case *image.Gray:
		rowFn = func(y int, mn, mx []int32) {
			row := s.Pix[y*s.Stride:]
			for x := 0; x < w*k; x++ {
				v := int32(row[x])
				mn[x/k] += v
				mx[x/k] += v
			}
		}
	case *image.NRGBA:
		rowFn = func(y int, mn, mx []int32) { rgbaRow(s.Pix[y*s.Stride:], w, k, mn, mx) }
	case *image.RGBA:
		rowFn = func(y int, mn, mx []int32) { rgbaRow(s.Pix[y*s.Stride:], w, k, mn, mx) }
	case *image.YCbCr:
		rowFn = func(y int, mn, mx []int32) {
			for x := 0; x < w*k; x++ {
				yi := s.YOffset(x+b.Min.X, y+b.Min.Y)
				ci := s.COffset(x+b.Min.X, y+b.Min.Y)
				r, g, bb := yccToRGB(s.Y[yi], s.Cb[ci], s.Cr[ci])
				lo, hi := min3(r, g, bb), max3(r, g, bb)
				mn[x/k] += lo
				mx[x/k] += hi
			}
		}
	default:
		n := toNRGBA(src)
		rowFn = func(y int, mn, mx []int32) { rgbaRow(n.Pix[y*n.Stride:], w, k, mn, mx) }
	}
	// Gray/NRGBA/RGBA Pix start at Bounds().Min for decoder output; the
	// offset Pix slices used above assume Min == (0,0) for those types.
	if b.Min != (image.Point{}) {
		n := toNRGBA(src)
		rowFn = func(y int, mn, mx []int32) { rgbaRow(n.Pix[y*n.Stride:], w, k, mn, mx) }
	}
	for oy := 0; oy < h; oy++ {
		clear(accMin)
		clear(accMax)
		for dy := 0; dy < k; dy++ {
			rowFn(oy*k+dy, accMin, accMax)
		}
		o := wk.dmin[oy*w : oy*w+w]
		p := wk.dmax[oy*w : oy*w+w]
		for x := range o {
			o[x] = 255 - float32(accMin[x])*inv
			p[x] = 255 - float32(accMax[x])*inv
		}
	}
	return wk
}

func rgbaRow(row []byte, w, k int, mn, mx []int32) {
	row = row[:4*w*k]
	if k == 2 {
		// The common case (pages of 2700 to 4500 px), unrolled.
		mn, mx = mn[:w], mx[:w]
		for ox := range mn {
			// Two pixels in one load.
			p := binary.LittleEndian.Uint64(row[8*ox : 8*ox+8])
			r0, g0, b0 := int32(p&0xff), int32(p>>8&0xff), int32(p>>16&0xff)
			r1, g1, b1 := int32(p>>32&0xff), int32(p>>40&0xff), int32(p>>48&0xff)
			mn[ox] += min(r0, g0, b0) + min(r1, g1, b1)
			mx[ox] += max(r0, g0, b0) + max(r1, g1, b1)
		}
		return
	}
	i := 0
	for ox := 0; ox < w; ox++ {
		var lo, hi int32
		for j := 0; j < k; j++ {
			r, g, b := int32(row[i]), int32(row[i+1]), int32(row[i+2])
			lo += min(r, g, b)
			hi += max(r, g, b)
			i += 4
		}
		mn[ox] += lo
		mx[ox] += hi
	}
}

func min3(a, b, c int32) int32 { return min(a, b, c) }
func max3(a, b, c int32) int32 { return max(a, b, c) }

// yccToRGB is JFIF's conversion (as in image/color.YCbCrToRGB).
func yccToRGB(y, cb, cr uint8) (int32, int32, int32) {
	yy := int32(y) * 0x10101
	cb1 := int32(cb) - 128
	cr1 := int32(cr) - 128
	r := yy + 91881*cr1
	g := yy - 22554*cb1 - 46802*cr1
	b := yy + 116130*cb1
	return clampRGB(r), clampRGB(g), clampRGB(b)
}

func clampRGB(v int32) int32 {
	if uint32(v)&0xff000000 == 0 {
		return v >> 16
	}
	if v < 0 {
		return 0
	}
	return 255
}

// coarseAngle returns the grid's orientation modulo 90° (radians, in
// (-π/4, π/4]) from the magnitude-weighted mean of the quadrupled gradient
// angle, and the coherence of that mean (0..1).
func coarseAngle(wk *work) (float64, float64) {
	var c4, s4, wsum float64
	d := wk.dmin
	w := wk.w
	for y := 1; y < wk.h-1; y += 2 {
		for x := 1; x < w-1; x++ {
			i := y*w + x
			gx := float64(d[i+1] - d[i-1])
			gy := float64(d[i+w] - d[i-w])
			m2 := gx*gx + gy*gy
			if m2 < 16 {
				continue
			}
			c2 := gx*gx - gy*gy
			s2 := 2 * gx * gy
			// (c2 + i s2)^2 / m2 has angle 4φ and weight m2.
			c4 += (c2*c2 - s2*s2) / m2
			s4 += 2 * c2 * s2 / m2
			wsum += m2
		}
	}
	if wsum == 0 {
		return 0, 0
	}
	return math.Atan2(s4, c4) / 4, math.Hypot(c4, s4) / wsum
}
