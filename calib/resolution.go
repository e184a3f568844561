package calib

import (
	"fmt"
	"image"
	"image/color"
	"math"
)

// Resolution is what a file states about its pixels' size, and what Decode
// did with it.
type Resolution struct {
	// X and Y are the pixels per Unit across and down, as stated; 0 when
	// the file states none.
	X float64 `json:"x,omitempty"`
	Y float64 `json:"y,omitempty"`
	// Unit is "inch", "cm", or "none" (TIFF ResolutionUnit 1: only the
	// ratio of X to Y means anything); "" when nothing is stated.
	Unit string `json:"unit,omitempty"`
	// From names where the values were read ("TIFF XResolution,
	// YResolution, ResolutionUnit", "PNG pHYs", "JPEG JFIF", "EXIF").
	From string `json:"from,omitempty"`
	// StretchX and StretchY are the factors by which the picture was
	// resampled across and down to make its pixels square (1 = not).
	StretchX float64 `json:"stretch_x,omitempty"`
	StretchY float64 `json:"stretch_y,omitempty"`
	// Note says, in words, what was done or why a stated value was not
	// used.
	Note string `json:"note,omitempty"`
}

// Resampled reports whether the page was stretched to square pixels.
func (r Resolution) Resampled() bool {
	return (r.StretchX > 0 && r.StretchX != 1) || (r.StretchY > 0 && r.StretchY != 1)
}

// Pixel shapes accepted from a file: a fine fax is 204 × 196 dpi, a
// normal one 204 × 98 (ITU-T T.4, from memory); beyond 4:1 the stated
// values are taken for a mistake. Under 1 % the pixels count as square.
const (
	maxPixelAspect    = 4.0
	squareTolerance   = 0.01
	tiffResUnitNone   = 1
	tiffResUnitInch   = 2
	tiffResUnitCentim = 3
)

// tiffResolution turns TIFF's XResolution, YResolution and ResolutionUnit
// (TIFF 6.0, section 8: unit 1 = none, 2 = inch, the default, 3 = cm)
// into a Resolution and dots per inch (0 when the unit gives none).
func tiffResolution(x, y float64, unit uint32, unitGiven bool) (r Resolution, dpix, dpiy float64) {
	if !(x > 0 && y > 0) || math.IsInf(x, 0) || math.IsInf(y, 0) {
		return Resolution{}, 0, 0
	}
	r = Resolution{X: x, Y: y, From: "TIFF XResolution, YResolution"}
	if unitGiven {
		r.From += ", ResolutionUnit"
	}
	switch unit {
	case tiffResUnitInch:
		r.Unit = "inch"
		return r, x, y
	case tiffResUnitCentim:
		r.Unit = "cm"
		return r, x * 2.54, y * 2.54
	case tiffResUnitNone:
		r.Unit = "none"
		return r, 0, 0
	}
	r.Unit = fmt.Sprintf("unknown (%d)", unit)
	r.Note = "the resolution unit is not one TIFF defines; the resolution is not used"
	r.X, r.Y = 0, 0
	return r, 0, 0
}

// squarePixels resamples pg.Image to square pixels when the file states a
// different resolution across and down, stretching the coarser axis (no
// detail is lost), and sets DPIX, DPIY to the resampled picture's. The
// stretched size is held to the pixel budget.
func squarePixels(pg *Page, name string, opt LoadOptions) error {
	r := &pg.Stated
	if r.X <= 0 || r.Y <= 0 {
		return nil
	}
	ratio := r.X / r.Y
	if math.Abs(ratio-1) < squareTolerance {
		return nil
	}
	if ratio > maxPixelAspect || ratio < 1/maxPixelAspect {
		r.Note = fmt.Sprintf("the stated pixel shape (%g × %g) is beyond %g:1 and was not used", r.X, r.Y, maxPixelAspect)
		pg.DPIX, pg.DPIY = 0, 0
		return nil
	}
	b := pg.Image.Bounds()
	w, h := b.Dx(), b.Dy()
	nw, nh := w, h
	if ratio > 1 {
		nh = int(math.Round(float64(h) * ratio))
	} else {
		nw = int(math.Round(float64(w) / ratio))
	}
	if err := checkSize(name, nw, nh, 4, opt); err != nil {
		return err
	}
	pg.Image = stretch(pg.Image, nw, nh)
	r.StretchX, r.StretchY = float64(nw)/float64(w), float64(nh)/float64(h)
	if pg.DPIX > 0 && pg.DPIY > 0 {
		pg.DPIX *= r.StretchX
		pg.DPIY *= r.StretchY
	}
	axis, f := "rows", r.StretchY
	if r.StretchX != 1 {
		axis, f = "columns", r.StretchX
	}
	r.Note = fmt.Sprintf("the file's pixels are %g × %g %s: %s stretched ×%.4f to square pixels (%d×%d → %d×%d)",
		r.X, r.Y, unitWord(r.Unit), axis, f, w, h, nw, nh)
	return nil
}

func unitWord(u string) string {
	switch u {
	case "inch":
		return "per inch"
	case "cm":
		return "per cm"
	}
	return "(ratio only)"
}

// stretch resamples src to w×h by linear interpolation along each axis
// (pixel centres mapped onto pixel centres). Grey pictures (a fax) stay
// grey; anything else becomes NRGBA.
func stretch(src image.Image, w, h int) image.Image {
	b := src.Bounds()
	sw, sh := b.Dx(), b.Dy()
	var in []uint8
	ch := 1
	if g, ok := greyOf(src); ok {
		in = g
	} else {
		n := toNRGBA(src)
		ch = 4
		in = make([]uint8, sw*sh*4)
		for y := 0; y < sh; y++ {
			copy(in[y*sw*4:(y+1)*sw*4], n.Pix[y*n.Stride:y*n.Stride+sw*4])
		}
	}
	xs := taps(sw, w)
	ys := taps(sh, h)
	// Across first into a row buffer per output row's two source rows.
	out := make([]uint8, w*h*ch)
	rowA := make([]float32, w*ch)
	rowB := make([]float32, w*ch)
	across := func(sy int, dst []float32) {
		row := in[sy*sw*ch : (sy+1)*sw*ch]
		for x, t := range xs {
			for c := 0; c < ch; c++ {
				dst[x*ch+c] = float32(row[t.i0*ch+c])*(1-t.f) + float32(row[t.i1*ch+c])*t.f
			}
		}
	}
	lastA, lastB := -1, -1
	for y, t := range ys {
		if t.i0 != lastA {
			if t.i0 == lastB {
				rowA, rowB = rowB, rowA
				lastA, lastB = lastB, lastA
			} else {
				across(t.i0, rowA)
				lastA = t.i0
			}
		}
		if t.i1 != lastB {
			across(t.i1, rowB)
			lastB = t.i1
		}
		o := out[y*w*ch : (y+1)*w*ch]
		for i := range o {
			o[i] = uint8(rowA[i]*(1-t.f) + rowB[i]*t.f + 0.5)
		}
	}
	r := image.Rect(0, 0, w, h)
	if ch == 1 {
		return &image.Gray{Pix: out, Stride: w, Rect: r}
	}
	return &image.NRGBA{Pix: out, Stride: 4 * w, Rect: r}
}

type tap struct {
	i0, i1 int
	f      float32
}

// taps maps each of n output positions onto the two source samples of m
// around it and the weight of the second.
func taps(m, n int) []tap {
	out := make([]tap, n)
	s := float64(m) / float64(n)
	for i := range out {
		p := (float64(i)+0.5)*s - 0.5
		i0 := int(math.Floor(p))
		f := p - float64(i0)
		if i0 < 0 {
			i0, f = 0, 0
		}
		if i0 >= m-1 {
			i0, f = m-1, 0
		}
		i1 := min(i0+1, m-1)
		out[i] = tap{i0, i1, float32(f)}
	}
	return out
}

// greyOf returns the pixels of a grey picture (Gray, or a paletted one
// whose palette is grey, as a bilevel fax is) row by row from (0,0).
func greyOf(src image.Image) ([]uint8, bool) {
	b := src.Bounds()
	w, h := b.Dx(), b.Dy()
	switch s := src.(type) {
	case *image.Gray:
		out := make([]uint8, w*h)
		for y := 0; y < h; y++ {
			off := (y+b.Min.Y-s.Rect.Min.Y)*s.Stride + (b.Min.X - s.Rect.Min.X)
			copy(out[y*w:(y+1)*w], s.Pix[off:off+w])
		}
		return out, true
	case *image.Paletted:
		lut := make([]uint8, 256)
		for i, c := range s.Palette {
			r, g, bb, _ := c.RGBA()
			if r != g || g != bb {
				return nil, false
			}
			lut[i] = color.GrayModel.Convert(c).(color.Gray).Y
		}
		out := make([]uint8, w*h)
		for y := 0; y < h; y++ {
			off := (y+b.Min.Y-s.Rect.Min.Y)*s.Stride + (b.Min.X - s.Rect.Min.X)
			for x, v := range s.Pix[off : off+w] {
				out[y*w+x] = lut[v]
			}
		}
		return out, true
	}
	return nil, false
}
