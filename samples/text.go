package samples

import (
	"image"
	"image/color"
	"math"
	"sync"

	"golang.org/x/image/font"
	"golang.org/x/image/font/basicfont"
	"golang.org/x/image/font/gofont/gobold"
	"golang.org/x/image/font/gofont/gomono"
	"golang.org/x/image/font/gofont/goregular"
	"golang.org/x/image/font/opentype"
	"golang.org/x/image/math/fixed"
)

var (
	fontsOnce sync.Once
	fonts     [3]*opentype.Font
)

func loadFonts() {
	for i, b := range [][]byte{goregular.TTF, gomono.TTF, gobold.TTF} {
		f, err := opentype.Parse(b)
		if err == nil {
			fonts[i] = f
		}
	}
}

// texter draws short text lines in the style's font.
type texter struct {
	face  font.Face // nil for the scaled bitmap font
	scale int       // bitmap scale factor
}

func newTexter(st Style) *texter {
	fontsOnce.Do(loadFonts)
	t := &texter{}
	if st.Font != FontDotMatrix && fonts[st.Font] != nil {
		face, err := opentype.NewFace(fonts[st.Font], &opentype.FaceOptions{Size: st.LabelPt, DPI: st.DPI, Hinting: font.HintingNone})
		if err == nil {
			t.face = face
			return t
		}
	}
	// basicfont's cap height is about 9 px; scale it to the point size.
	capPx := st.LabelPt * 0.7 / 72 * st.DPI
	t.scale = max(1, int(math.Round(capPx/9)))
	return t
}

// width returns the advance of s in px.
func (t *texter) width(s string) float64 {
	if t.face != nil {
		return float64(font.MeasureString(t.face, s)) / 64
	}
	return float64(7 * t.scale * len([]rune(s)))
}

// draw writes s with its baseline starting at (x, y) px.
func (t *texter) draw(dst *image.NRGBA, x, y float64, s string, c color.NRGBA) {
	if s == "" {
		return
	}
	if t.face != nil {
		d := font.Drawer{Dst: dst, Src: image.NewUniform(c), Face: t.face, Dot: fixed.Point26_6{X: fixed.Int26_6(x * 64), Y: fixed.Int26_6(y * 64)}}
		d.DrawString(s)
		return
	}
	// Bitmap font drawn small, then blown up pixel by pixel.
	face := basicfont.Face7x13
	// The bitmap font lacks most non-ASCII signs: print a dash instead.
	rs := []rune(s)
	for i, r := range rs {
		if _, ok := face.GlyphAdvance(r); !ok || r > 126 {
			rs[i] = '-'
		}
	}
	s = string(rs)
	w := font.MeasureString(face, s).Ceil()
	h := face.Height
	small := image.NewAlpha(image.Rect(0, 0, w, h))
	d := font.Drawer{Dst: small, Src: image.Opaque, Face: face, Dot: fixed.P(0, face.Ascent)}
	d.DrawString(s)
	k := t.scale
	ox, oy := int(math.Round(x)), int(math.Round(y))-face.Ascent*k
	b := dst.Rect
	for sy := 0; sy < h; sy++ {
		for sx := 0; sx < w; sx++ {
			a := small.Pix[sy*small.Stride+sx]
			if a == 0 {
				continue
			}
			for dy := 0; dy < k; dy++ {
				for dx := 0; dx < k; dx++ {
					px, py := ox+sx*k+dx, oy+sy*k+dy
					if px < b.Min.X || py < b.Min.Y || px >= b.Max.X || py >= b.Max.Y {
						continue
					}
					i := dst.PixOffset(px, py)
					blendPx(dst.Pix[i:i+4], c, uint32(a)*uint32(c.A)/255)
				}
			}
		}
	}
}
