package digitize

import (
	"fmt"
	"image"
	"math"
	"runtime"
	"sync"

	"tracelift/calib"
)

// A rotation calibration left on the page shows twice in the traces:
// the rows' time origins drift sideways down the page (the shear the time
// base fits) and each baseline climbs or falls across the page. The
// first moves every row's clock, which the time base absorbs; the second
// adds a ramp to every lead, which nothing downstream removes. Turning
// the page by the residual angle removes both.

// minDeskewDeg is the smallest residual rotation corrected: below it the
// baseline ramp over a 250 mm row stays under 0.45 mm (0.045 mV at
// 10 mm/mV).
const minDeskewDeg = 0.1

// maxDeskewDeg is the largest: more than that is not a residual of a
// calibrated page but a misread origin line.
const maxDeskewDeg = 1.5

// deskew turns cal's rectified page and ink map by the small angle whose
// tangent is shear (the drift of the rows' origin per px down the page)
// about (xc, yc), updating RectToImage, the pulse boxes and the rotation,
// and says so in cal.Warnings. The new image at (x', y') shows the old
// one at (x' + shear·(y'−yc), y' − shear·(x'−xc)).
func deskew(cal *calib.Result, shear, xc, yc float64) {
	b := shear
	// new → old as an affine map, row-major 3×3.
	m := [9]float64{1, b, -b * yc, -b, 1, b * xc, 0, 0, 1}
	if cal.Rectified != nil {
		cal.Rectified = warpNRGBA(cal.Rectified, m)
	}
	if cal.Ink != nil {
		cal.Ink = warpGray(cal.Ink, m)
	}
	if r := cal.RectToImage; r != ([9]float64{}) {
		var o [9]float64
		for i := 0; i < 3; i++ {
			for j := 0; j < 3; j++ {
				for k := 0; k < 3; k++ {
					o[3*i+j] += r[3*i+k] * m[3*k+j]
				}
			}
		}
		cal.RectToImage = o
	}
	// old → new, to first order in b (the error is b² of a page, under
	// a tenth of a pixel within maxDeskewDeg).
	fwd := func(x, y float64) (float64, float64) {
		return x - b*(y-yc), y + b*(x-xc)
	}
	for i, p := range cal.Pulses {
		x0, y0 := fwd(p.Box[0], p.Box[1])
		x1, y1 := fwd(p.Box[2], p.Box[3])
		cal.Pulses[i].Box = [4]float64{x0, y0, x1, y1}
	}
	deg := math.Atan(b) * 180 / math.Pi
	cal.RotationDeg += deg
	cal.Warnings = append(cal.Warnings, fmt.Sprintf("digitize: the rows' starts and baselines show the page still turned by %.2f°; it was turned straight", -deg))
}

// warpGray resamples g through the new → old affine map m, bilinearly
// (8-bit weights); outside the old image reads as 0 (paper).
func warpGray(g *image.Gray, m [9]float64) *image.Gray {
	b := g.Bounds()
	w, h := b.Dx(), b.Dy()
	out := image.NewGray(image.Rect(0, 0, w, h))
	st := g.Stride
	parallelRows(h, func(y int) {
		dst := out.Pix[y*out.Stride : y*out.Stride+w]
		fy := float64(y) + 0.5
		sx := m[0]*0.5 + m[1]*fy + m[2] - 0.5
		sy := m[3]*0.5 + m[4]*fy + m[5] - 0.5
		for x := range dst {
			px, py := sx+m[0]*float64(x), sy+m[3]*float64(x)
			x0, y0 := int(math.Floor(px)), int(math.Floor(py))
			if x0 < 0 || y0 < 0 || x0+1 >= w || y0+1 >= h {
				continue
			}
			wx := int((px - float64(x0)) * 256)
			wy := int((py - float64(y0)) * 256)
			i := y0*st + x0
			top := int(g.Pix[i])*(256-wx) + int(g.Pix[i+1])*wx
			bot := int(g.Pix[i+st])*(256-wx) + int(g.Pix[i+st+1])*wx
			dst[x] = uint8((top*(256-wy) + bot*wy + 32768) >> 16)
		}
	})
	return out
}

// warpNRGBA is warpGray for a colour page; outside reads as white.
func warpNRGBA(g *image.NRGBA, m [9]float64) *image.NRGBA {
	b := g.Bounds()
	w, h := b.Dx(), b.Dy()
	out := image.NewNRGBA(image.Rect(0, 0, w, h))
	st := g.Stride
	parallelRows(h, func(y int) {
		dst := out.Pix[y*out.Stride : y*out.Stride+4*w]
		fy := float64(y) + 0.5
		sx := m[0]*0.5 + m[1]*fy + m[2] - 0.5
		sy := m[3]*0.5 + m[4]*fy + m[5] - 0.5
		for x := 0; x < w; x++ {
			d := dst[4*x : 4*x+4 : 4*x+4]
			px, py := sx+m[0]*float64(x), sy+m[3]*float64(x)
			x0, y0 := int(math.Floor(px)), int(math.Floor(py))
			if x0 < 0 || y0 < 0 || x0+1 >= w || y0+1 >= h {
				d[0], d[1], d[2], d[3] = 255, 255, 255, 255
				continue
			}
			wx := int((px - float64(x0)) * 256)
			wy := int((py - float64(y0)) * 256)
			ax, ay := 256-wx, 256-wy
			i := y0*st + 4*x0
			p0 := g.Pix[i : i+8 : i+8]
			p1 := g.Pix[i+st : i+st+8 : i+st+8]
			for c := 0; c < 4; c++ {
				top := int(p0[c])*ax + int(p0[4+c])*wx
				bot := int(p1[c])*ax + int(p1[4+c])*wx
				d[c] = uint8((top*ay + bot*wy + 32768) >> 16)
			}
		}
	})
	return out
}

// parallelRows runs f for every row in [0, h) over GOMAXPROCS workers.
func parallelRows(h int, f func(y int)) {
	n := max(1, min(runtime.GOMAXPROCS(0), 8))
	var wg sync.WaitGroup
	for k := 0; k < n; k++ {
		wg.Add(1)
		go func(k int) {
			defer wg.Done()
			for y := k * h / n; y < (k+1)*h/n; y++ {
				f(y)
			}
		}(k)
	}
	wg.Wait()
}
