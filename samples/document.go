package samples

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/jpeg"
	"math"
	"math/rand"
)

// CoverSheet draws a fax cover sheet of invented wording on a page of
// wMM × hMM at dpi: a large heading, form lines with rules under them, a
// boxed table, paragraphs of text and a scribble where a name would be
// signed. It holds neither an ECG grid nor a trace; documents put it
// before their ECG pages.
func CoverSheet(wMM, hMM, dpi float64, seed int64) *image.NRGBA {
	fontsOnce.Do(loadFonts)
	px := dpi / 25.4
	w, h := int(wMM*px), int(hMM*px)
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	draw.Draw(img, img.Rect, image.NewUniform(color.NRGBA{255, 255, 255, 255}), image.Point{}, draw.Src)
	ink := color.NRGBA{20, 20, 20, 255}
	rng := rand.New(rand.NewSource(seed))
	heading := newTexter(Style{Font: FontBold, LabelPt: 28, DPI: dpi})
	body := newTexter(Style{Font: FontSans, LabelPt: 11, DPI: dpi})
	mono := newTexter(Style{Font: FontMono, LabelPt: 10, DPI: dpi})
	x0 := 20 * px
	y := 30 * px
	heading.draw(img, x0, y, "FACSIMILE TRANSMISSION", ink)
	y += 16 * px
	for _, f := range []string{"To:", "From:", "Date:", "Pages (with this one):", "Subject: tracing for review"} {
		body.draw(img, x0, y, f, ink)
		rule(img, x0+45*px, y+1*px, x0+(wMM-40)*px, 0.3*px, ink)
		y += 9 * px
	}
	// A table of three rows and three columns.
	y += 4 * px
	tx0, tx1 := x0, x0+(wMM-40)*px
	for r := 0; r <= 3; r++ {
		rule(img, tx0, y+float64(r)*8*px, tx1, 0.4*px, ink)
	}
	for c := 0; c <= 3; c++ {
		xx := tx0 + float64(c)*(tx1-tx0)/3
		vrule(img, xx, y, y+24*px, 0.4*px, ink)
	}
	cells := []string{"Item", "Count", "Remark", "sheets", "2", "see next page", "urgent", "no", "call back on receipt"}
	for i, s := range cells {
		r, c := i/3, i%3
		body.draw(img, tx0+float64(c)*(tx1-tx0)/3+2*px, y+float64(r)*8*px+6*px, s, ink)
	}
	y += 36 * px
	words := []string{"the", "enclosed", "pages", "are", "meant", "only", "for", "the", "person", "named",
		"above", "if", "received", "in", "error", "please", "tell", "the", "sender", "and", "destroy", "them",
		"thank", "you", "for", "reading", "this", "note", "with", "care", "before", "the", "next", "call"}
	for line := 0; line < 9 && y < float64(h)-40*px; line++ {
		s := ""
		for len(s) < 70 {
			s += words[rng.Intn(len(words))] + " "
		}
		if line%3 == 2 {
			mono.draw(img, x0, y, s, ink)
		} else {
			body.draw(img, x0, y, s, ink)
		}
		y += 6 * px
	}
	// A scribbled signature above a rule.
	y += 12 * px
	sx := x0 + 10*px
	prevX, prevY := sx, y
	for i := 1; i <= 400; i++ {
		t := float64(i) / 400
		xx := sx + t*55*px
		yy := y - (3+3*math.Sin(t*40+rng.Float64()*0.3))*px*math.Sin(t*math.Pi)
		segment(img, prevX, prevY, xx, yy, 0.35*px, ink)
		prevX, prevY = xx, yy
	}
	rule(img, x0, y+2*px, x0+80*px, 0.3*px, ink)
	return img
}

func rule(img *image.NRGBA, x0, y, x1, thick float64, c color.NRGBA) {
	r := image.Rect(int(x0), int(y-thick/2), int(x1), int(y+thick/2)+1)
	draw.Draw(img, r, image.NewUniform(c), image.Point{}, draw.Src)
}

func vrule(img *image.NRGBA, x, y0, y1, thick float64, c color.NRGBA) {
	r := image.Rect(int(x-thick/2), int(y0), int(x+thick/2)+1, int(y1))
	draw.Draw(img, r, image.NewUniform(c), image.Point{}, draw.Src)
}

func segment(img *image.NRGBA, x0, y0, x1, y1, thick float64, c color.NRGBA) {
	n := int(math.Max(math.Abs(x1-x0), math.Abs(y1-y0))) + 1
	for i := 0; i <= n; i++ {
		t := float64(i) / float64(n)
		x, y := x0+(x1-x0)*t, y0+(y1-y0)*t
		r := image.Rect(int(x-thick/2), int(y-thick/2), int(x+thick/2)+1, int(y+thick/2)+1)
		draw.Draw(img, r, image.NewUniform(c), image.Point{}, draw.Src)
	}
}

// TIFFPage is one page for WriteTIFF.
type TIFFPage struct {
	Image image.Image
	// DPIX, DPIY are written as XResolution and YResolution (per inch,
	// ResolutionUnit 2); 0 leaves the three tags out.
	DPIX, DPIY float64
	// Bilevel writes 1 bit per pixel (grey below 128 black), as a fax
	// is; otherwise 8-bit grey.
	Bilevel bool
}

// WriteTIFF encodes pages as one baseline TIFF (TIFF 6.0: little-endian,
// uncompressed, one strip per page, grey or bilevel with BlackIsZero).
// golang.org/x/image/tiff writes neither several pages nor a resolution
// other than 72 dpi, hence this small writer.
func WriteTIFF(pages []TIFFPage) ([]byte, error) {
	if len(pages) == 0 {
		return nil, errors.New("samples: no page to write")
	}
	var b bytes.Buffer
	le := binary.LittleEndian
	b.WriteString("II*\x00")
	binary.Write(&b, le, uint32(8))
	type entry struct {
		tag, typ uint16
		val      uint32 // value or offset
	}
	for p, pg := range pages {
		bnd := pg.Image.Bounds()
		w, h := bnd.Dx(), bnd.Dy()
		bits := 8
		rowBytes := w
		if pg.Bilevel {
			bits, rowBytes = 1, (w+7)/8
		}
		pix := make([]byte, rowBytes*h)
		grey := greyPlane(pg.Image)
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				g := grey[y*w+x]
				if pg.Bilevel {
					if g >= 128 {
						pix[y*rowBytes+x/8] |= 0x80 >> (x % 8)
					}
				} else {
					pix[y*rowBytes+x] = g
				}
			}
		}
		n := 9
		if pg.DPIX > 0 && pg.DPIY > 0 {
			n += 3
		}
		start := uint32(b.Len())
		ifdLen := uint32(2 + 12*n + 4)
		ratOff := start + ifdLen
		dataOff := ratOff + 16
		next := uint32(0)
		if p < len(pages)-1 {
			next = dataOff + uint32(len(pix))
			next += next & 1 // IFDs start on a word boundary
		}
		es := []entry{
			{256, 4, uint32(w)}, {257, 4, uint32(h)}, {258, 3, uint32(bits)}, {259, 3, 1}, {262, 3, 1},
			{273, 4, dataOff}, {277, 3, 1}, {278, 4, uint32(h)}, {279, 4, uint32(len(pix))},
		}
		if pg.DPIX > 0 && pg.DPIY > 0 {
			es = append(es, entry{282, 5, ratOff}, entry{283, 5, ratOff + 8}, entry{296, 3, 2})
		}
		// Tags in ascending order, as TIFF 6.0 asks.
		for i := 1; i < len(es); i++ {
			for j := i; j > 0 && es[j].tag < es[j-1].tag; j-- {
				es[j], es[j-1] = es[j-1], es[j]
			}
		}
		binary.Write(&b, le, uint16(n))
		for _, e := range es {
			binary.Write(&b, le, e.tag)
			binary.Write(&b, le, e.typ)
			binary.Write(&b, le, uint32(1))
			if e.typ == 3 {
				binary.Write(&b, le, []uint16{uint16(e.val), 0})
			} else {
				binary.Write(&b, le, e.val)
			}
		}
		binary.Write(&b, le, next)
		// Resolutions as rationals with denominator 1000.
		binary.Write(&b, le, []uint32{uint32(math.Round(pg.DPIX * 1000)), 1000, uint32(math.Round(pg.DPIY * 1000)), 1000})
		b.Write(pix)
		if next != 0 && b.Len()&1 == 1 {
			b.WriteByte(0)
		}
	}
	return b.Bytes(), nil
}

// greyPlane returns the picture's luminance row by row from (0,0).
func greyPlane(m image.Image) []uint8 {
	b := m.Bounds()
	w, h := b.Dx(), b.Dy()
	out := make([]uint8, w*h)
	if n, ok := m.(*image.NRGBA); ok {
		for y := 0; y < h; y++ {
			row := n.Pix[(y+b.Min.Y-n.Rect.Min.Y)*n.Stride+(b.Min.X-n.Rect.Min.X)*4:]
			for x := 0; x < w; x++ {
				r, g, bb := uint32(row[4*x]), uint32(row[4*x+1]), uint32(row[4*x+2])
				out[y*w+x] = uint8((19595*r + 38470*g + 7471*bb + 1<<15) >> 16)
			}
		}
		return out
	}
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			out[y*w+x] = color.GrayModel.Convert(m.At(b.Min.X+x, b.Min.Y+y)).(color.Gray).Y
		}
	}
	return out
}

// ScannedPDF wraps pages as a scanner writes them into a PDF: each page an
// 8-bit JPEG image (DCTDecode, ISO 32000-1 7.4.8) filling a page of its
// size at dpi. The structure is the plain one of ISO 32000-1 7.5: header,
// objects, cross-reference table, trailer.
func ScannedPDF(pages []image.Image, dpi float64, quality int) ([]byte, error) {
	if len(pages) == 0 || !(dpi > 0) {
		return nil, errors.New("samples: no page or no resolution for the PDF")
	}
	var b bytes.Buffer
	var offs []int
	obj := func(body string, stream []byte) {
		offs = append(offs, b.Len())
		fmt.Fprintf(&b, "%d 0 obj\n%s", len(offs), body)
		if stream != nil {
			b.WriteString("\nstream\n")
			b.Write(stream)
			b.WriteString("\nendstream")
		}
		b.WriteString("\nendobj\n")
	}
	b.WriteString("%PDF-1.4\n%\xe2\xe3\xcf\xd3\n")
	n := len(pages)
	// Objects: 1 catalog, 2 page tree, then per page: page, content, image.
	kids := ""
	for i := 0; i < n; i++ {
		kids += fmt.Sprintf("%d 0 R ", 3+3*i)
	}
	obj("<< /Type /Catalog /Pages 2 0 R >>", nil)
	obj(fmt.Sprintf("<< /Type /Pages /Kids [%s] /Count %d >>", kids, n), nil)
	for i, pg := range pages {
		bnd := pg.Bounds()
		wpt, hpt := float64(bnd.Dx())/dpi*72, float64(bnd.Dy())/dpi*72
		var jb bytes.Buffer
		grey := image.NewGray(image.Rect(0, 0, bnd.Dx(), bnd.Dy()))
		copy(grey.Pix, greyPlane(pg))
		if err := jpeg.Encode(&jb, grey, &jpeg.Options{Quality: quality}); err != nil {
			return nil, err
		}
		page, content, img := 3+3*i, 4+3*i, 5+3*i
		obj(fmt.Sprintf("<< /Type /Page /Parent 2 0 R /MediaBox [0 0 %.2f %.2f] /Contents %d 0 R /Resources << /XObject << /Im%d %d 0 R >> >> >>", wpt, hpt, content, i, img), nil)
		cs := fmt.Sprintf("q %.2f 0 0 %.2f 0 0 cm /Im%d Do Q", wpt, hpt, i)
		obj(fmt.Sprintf("<< /Length %d >>", len(cs)), []byte(cs))
		obj(fmt.Sprintf("<< /Type /XObject /Subtype /Image /Width %d /Height %d /ColorSpace /DeviceGray /BitsPerComponent 8 /Filter /DCTDecode /Length %d >>", bnd.Dx(), bnd.Dy(), jb.Len()), jb.Bytes())
		_ = page
	}
	xref := b.Len()
	fmt.Fprintf(&b, "xref\n0 %d\n0000000000 65535 f \n", len(offs)+1)
	for _, o := range offs {
		fmt.Fprintf(&b, "%010d 00000 n \n", o)
	}
	fmt.Fprintf(&b, "trailer\n<< /Size %d /Root 1 0 R >>\nstartxref\n%d\n%%%%EOF\n", len(offs)+1, xref)
	return b.Bytes(), nil
}

// FaxRows turns a page rendered at a fax's horizontal resolution into the
// bilevel picture a fax machine sends at a coarser vertical one: each
// output row averages the rows it covers (keep = output rows per input
// row, e.g. 98/204) and is cut at mid-grey.
func FaxRows(img image.Image, keep float64) *image.Gray {
	b := img.Bounds()
	w, h := b.Dx(), b.Dy()
	g := greyPlane(img)
	oh := max(1, int(math.Round(float64(h)*keep)))
	out := image.NewGray(image.Rect(0, 0, w, oh))
	for oy := 0; oy < oh; oy++ {
		y0 := float64(oy) / keep
		y1 := float64(oy+1) / keep
		for x := 0; x < w; x++ {
			var s, n float64
			for y := int(y0); y < int(math.Ceil(y1)) && y < h; y++ {
				wt := math.Min(y1, float64(y+1)) - math.Max(y0, float64(y))
				s += wt * float64(g[y*w+x])
				n += wt
			}
			v := uint8(255)
			if n > 0 && s/n < 128 {
				v = 0
			}
			out.Pix[oy*out.Stride+x] = v
		}
	}
	return out
}
