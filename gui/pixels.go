package gui

import (
	"image"
	"image/color"
	"math"
)

// blitScaled draws src into dst with nearest-neighbour sampling: dst pixel
// (x, y) shows src pixel (offX + x/k, offY + y/k). Rows are walked through
// Pix directly. Kept by hand: on one core (taskset -c 0 go test -bench
// ViewBlit -run '^$' ./gui/, a 300-dpi page into a 1600×1000 view at half
// size) it takes 6.3-7.4 ms a redraw, where imaging's Crop and Resize
// (nearest neighbour) take 37 ms and two new images.
func blitScaled(dst, src *image.NRGBA, offX, offY, k float64) {
	w, h := dst.Rect.Dx(), dst.Rect.Dy()
	sw, sh := src.Rect.Dx(), src.Rect.Dy()
	cols := make([]int, w)
	for x := range cols {
		sx := int(math.Floor(offX + (float64(x)+0.5)/k))
		if sx < 0 || sx >= sw {
			sx = -1
		}
		cols[x] = sx
	}
	for y := 0; y < h; y++ {
		sy := int(math.Floor(offY + (float64(y)+0.5)/k))
		if sy < 0 || sy >= sh {
			continue
		}
		srow := src.Pix[sy*src.Stride:]
		drow := dst.Pix[y*dst.Stride:]
		for x, sx := range cols {
			if sx < 0 {
				continue
			}
			copy(drow[4*x:4*x+4], srow[4*sx:4*sx+4])
		}
	}
}

func blend(dst *image.NRGBA, x, y int, c color.NRGBA) {
	if x < 0 || y < 0 || x >= dst.Rect.Dx() || y >= dst.Rect.Dy() {
		return
	}
	i := y*dst.Stride + 4*x
	a := uint32(c.A)
	p := dst.Pix[i : i+4]
	p[0] = uint8((uint32(c.R)*a + uint32(p[0])*(255-a)) / 255)
	p[1] = uint8((uint32(c.G)*a + uint32(p[1])*(255-a)) / 255)
	p[2] = uint8((uint32(c.B)*a + uint32(p[2])*(255-a)) / 255)
	p[3] = 255
}

// line draws a segment of width wd with a square brush.
func line(dst *image.NRGBA, x0, y0, x1, y1, wd float64, c color.NRGBA) {
	W, H := float64(dst.Rect.Dx()), float64(dst.Rect.Dy())
	if (x0 < -wd && x1 < -wd) || (x0 > W+wd && x1 > W+wd) || (y0 < -wd && y1 < -wd) || (y0 > H+wd && y1 > H+wd) {
		return
	}
	n := int(math.Ceil(math.Max(math.Abs(x1-x0), math.Abs(y1-y0))))
	if n > 20000 {
		return
	}
	r := int(math.Max(0, math.Round(wd/2-0.5)))
	for s := 0; s <= n; s++ {
		f := 0.0
		if n > 0 {
			f = float64(s) / float64(n)
		}
		cx, cy := int(math.Round(x0+f*(x1-x0))), int(math.Round(y0+f*(y1-y0)))
		for dy := -r; dy <= r; dy++ {
			for dx := -r; dx <= r; dx++ {
				setPx(dst, cx+dx, cy+dy, c)
			}
		}
	}
}

func setPx(dst *image.NRGBA, x, y int, c color.NRGBA) {
	if c.A == 255 {
		if x >= 0 && y >= 0 && x < dst.Rect.Dx() && y < dst.Rect.Dy() {
			i := y*dst.Stride + 4*x
			dst.Pix[i], dst.Pix[i+1], dst.Pix[i+2], dst.Pix[i+3] = c.R, c.G, c.B, 255
		}
		return
	}
	blend(dst, x, y, c)
}

func rect(dst *image.NRGBA, x0, y0, x1, y1, wd float64, c color.NRGBA) {
	line(dst, x0, y0, x1, y0, wd, c)
	line(dst, x1, y0, x1, y1, wd, c)
	line(dst, x1, y1, x0, y1, wd, c)
	line(dst, x0, y1, x0, y0, wd, c)
}

func dashed(dst *image.NRGBA, x0, y0, x1, y1, wd float64, c color.NRGBA) {
	const on, off = 6.0, 4.0
	L := math.Hypot(x1-x0, y1-y0)
	if L == 0 || L > 1e5 {
		return
	}
	for s := 0.0; s < L; s += on + off {
		e := math.Min(s+on, L)
		line(dst, x0+(x1-x0)*s/L, y0+(y1-y0)*s/L, x0+(x1-x0)*e/L, y0+(y1-y0)*e/L, wd, c)
	}
}

func fill(dst *image.NRGBA, x0, y0, x1, y1 float64, c color.NRGBA) {
	for y := int(math.Max(0, y0)); y < int(math.Min(float64(dst.Rect.Dy()), y1)); y++ {
		for x := int(math.Max(0, x0)); x < int(math.Min(float64(dst.Rect.Dx()), x1)); x++ {
			blend(dst, x, y, c)
		}
	}
}
