package samples

import (
	"image"
	"image/color"
	"image/draw"
	"runtime"
	"sync"
)

// parallelRows runs f over row bands on every CPU.
func parallelRows(n int, f func(y0, y1 int)) {
	w := runtime.GOMAXPROCS(0)
	if w > n {
		w = max(n, 1)
	}
	var wg sync.WaitGroup
	for i := 0; i < w; i++ {
		y0, y1 := n*i/w, n*(i+1)/w
		wg.Add(1)
		go func() {
			defer wg.Done()
			f(y0, y1)
		}()
	}
	wg.Wait()
}

func clamp8(v float64) uint8 {
	if v <= 0 {
		return 0
	}
	if v >= 255 {
		return 255
	}
	return uint8(v + 0.5)
}

func cloneNRGBA(src *image.NRGBA) *image.NRGBA {
	b := src.Rect
	dst := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
	for y := 0; y < b.Dy(); y++ {
		copy(dst.Pix[y*dst.Stride:y*dst.Stride+4*b.Dx()], src.Pix[(y)*src.Stride:])
	}
	return dst
}

// opaqueRGBA views an opaque NRGBA image as RGBA (the same bytes when
// every alpha is 255), which the JPEG encoder reads quickly.
func opaqueRGBA(m *image.NRGBA) *image.RGBA {
	return &image.RGBA{Pix: m.Pix, Stride: m.Stride, Rect: m.Rect}
}

func toNRGBA(m image.Image) *image.NRGBA {
	if n, ok := m.(*image.NRGBA); ok && n.Rect.Min == (image.Point{}) {
		return n
	}
	if yc, ok := m.(*image.YCbCr); ok {
		b := yc.Rect
		dst := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
		parallelRows(b.Dy(), func(y0, y1 int) {
			for y := y0; y < y1; y++ {
				row := dst.Pix[y*dst.Stride:]
				for x := 0; x < b.Dx(); x++ {
					yi := yc.YOffset(b.Min.X+x, b.Min.Y+y)
					ci := yc.COffset(b.Min.X+x, b.Min.Y+y)
					r, g, bb := color.YCbCrToRGB(yc.Y[yi], yc.Cb[ci], yc.Cr[ci])
					row[4*x], row[4*x+1], row[4*x+2], row[4*x+3] = r, g, bb, 255
				}
			}
		})
		return dst
	}
	b := m.Bounds()
	dst := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
	draw.Draw(dst, dst.Rect, m, b.Min, draw.Src)
	return dst
}
