package calib

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"image"
	"image/color"
	"image/jpeg"
	"image/png"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"golang.org/x/image/tiff"

	"tracelift/samples"
)

func tinyImage(w, h int) *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			img.SetNRGBA(x, y, color.NRGBA{uint8(10 * x), uint8(10 * y), 50, 255})
		}
	}
	return img
}

func encPNG(t testing.TB, img image.Image) []byte {
	var b bytes.Buffer
	if err := png.Encode(&b, img); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func encJPEG(t testing.TB, img image.Image) []byte {
	var b bytes.Buffer
	if err := jpeg.Encode(&b, img, &jpeg.Options{Quality: 95}); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func encTIFF(t testing.TB, img image.Image) []byte {
	var b bytes.Buffer
	if err := tiff.Encode(&b, img, nil); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// withExifOrientation inserts an APP1 Exif segment holding only the
// Orientation tag (TIFF tag 274; values 1–8 as defined by the Exif
// standard, CIPA DC-008 / JEITA CP-3451) right after the JPEG SOI.
func withExifOrientation(jpg []byte, o uint16) []byte {
	var t bytes.Buffer
	t.WriteString("MM\x00*")
	binary.Write(&t, binary.BigEndian, uint32(8))
	binary.Write(&t, binary.BigEndian, uint16(1))
	binary.Write(&t, binary.BigEndian, []uint16{274, 3})
	binary.Write(&t, binary.BigEndian, uint32(1))
	binary.Write(&t, binary.BigEndian, []uint16{o, 0})
	binary.Write(&t, binary.BigEndian, uint32(0))
	payload := append([]byte("Exif\x00\x00"), t.Bytes()...)
	seg := []byte{0xFF, 0xE1, 0, 0}
	binary.BigEndian.PutUint16(seg[2:], uint16(len(payload)+2))
	out := append([]byte{}, jpg[:2]...)
	out = append(out, seg...)
	out = append(out, payload...)
	return append(out, jpg[2:]...)
}

func TestDecodeFormats(t *testing.T) {
	img := tinyImage(12, 8)
	for _, c := range []struct {
		name, format string
		data         []byte
	}{
		{"a.png", "png", encPNG(t, img)},
		{"a.jpg", "jpeg", encJPEG(t, img)},
		{"a.tif", "tiff", encTIFF(t, img)},
	} {
		t.Run(c.format, func(t *testing.T) {
			pg, err := Decode(c.data, c.name, LoadOptions{})
			if err != nil {
				t.Fatal(err)
			}
			if pg.Format != c.format || pg.Image.Bounds().Dx() != 12 || pg.Image.Bounds().Dy() != 8 {
				t.Fatalf("got %s %v", pg.Format, pg.Image.Bounds())
			}
			if len(pg.SHA256) != 64 || pg.PageCount != 1 {
				t.Fatalf("sha %q pages %d", pg.SHA256, pg.PageCount)
			}
		})
	}
}

// cutScan drops the last third of a JPEG, end marker included.
func cutScan(jpg []byte) []byte { return jpg[:len(jpg)*2/3] }

// Exif orientation 6 means the stored picture must be turned 90°
// clockwise to be shown upright; 3 means 180° (Exif 2.3, tag 274).
func TestJPEGExifOrientation(t *testing.T) {
	img := image.NewNRGBA(image.Rect(0, 0, 40, 16))
	for y := 0; y < 16; y++ {
		for x := 0; x < 40; x++ {
			img.SetNRGBA(x, y, color.NRGBA{255, 255, 255, 255})
		}
	}
	// A black block in the stored top-left corner.
	for y := 0; y < 8; y++ {
		for x := 0; x < 8; x++ {
			img.SetNRGBA(x, y, color.NRGBA{0, 0, 0, 255})
		}
	}
	jpg := encJPEG(t, img)
	dark := func(im image.Image, x, y int) bool {
		r, _, _, _ := im.At(x, y).RGBA()
		return r < 0x4000
	}
	pg, err := Decode(withExifOrientation(jpg, 6), "phone.jpg", LoadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if b := pg.Image.Bounds(); b.Dx() != 16 || b.Dy() != 40 {
		t.Fatalf("orientation 6: size %v, want 16×40", b)
	}
	// Turned clockwise, the stored top-left lands at the top-right.
	if !dark(pg.Image, 13, 2) || dark(pg.Image, 2, 2) {
		t.Fatal("orientation 6: the block is not at the top-right")
	}
	pg, err = Decode(withExifOrientation(jpg, 3), "phone.jpg", LoadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if !dark(pg.Image, 37, 13) || dark(pg.Image, 2, 2) {
		t.Fatal("orientation 3: the block is not at the bottom-right")
	}
}

// twoPageTIFF writes a baseline TIFF (TIFF 6.0, uncompressed 8-bit grey,
// one strip per page) with two pages of different grey levels.
func twoPageTIFF(w, h int, levels ...uint8) []byte {
	var b bytes.Buffer
	b.WriteString("II*\x00")
	le := binary.LittleEndian
	off := uint32(8)
	binary.Write(&b, le, off)
	for p, lv := range levels {
		const n = 9
		ifdLen := uint32(2 + 12*n + 4)
		data := off + ifdLen
		next := uint32(0)
		if p < len(levels)-1 {
			next = data + uint32(w*h)
		}
		entries := [][3]uint32{
			{256, 3, uint32(w)}, {257, 3, uint32(h)}, {258, 3, 8}, {259, 3, 1}, {262, 3, 1},
			{273, 4, data}, {277, 3, 1}, {278, 3, uint32(h)}, {279, 4, uint32(w * h)},
		}
		binary.Write(&b, le, uint16(n))
		for _, e := range entries {
			binary.Write(&b, le, uint16(e[0]))
			binary.Write(&b, le, uint16(e[1]))
			binary.Write(&b, le, uint32(1))
			if e[1] == 3 {
				binary.Write(&b, le, []uint16{uint16(e[2]), 0})
			} else {
				binary.Write(&b, le, e[2])
			}
		}
		binary.Write(&b, le, next)
		b.Write(bytes.Repeat([]byte{lv}, w*h))
		off = next
	}
	return b.Bytes()
}

func TestTIFFMultiPage(t *testing.T) {
	data := twoPageTIFF(6, 4, 40, 200)
	for page, want := range []uint8{40, 200} {
		pg, err := Decode(data, "fax.tif", LoadOptions{Page: page})
		if err != nil {
			t.Fatalf("page %d: %v", page, err)
		}
		if pg.PageCount != 2 || pg.PageIndex != page {
			t.Fatalf("page %d: count %d index %d", page, pg.PageCount, pg.PageIndex)
		}
		if g := color.GrayModel.Convert(pg.Image.At(3, 2)).(color.Gray).Y; g != want {
			t.Fatalf("page %d: grey %d, want %d", page, g, want)
		}
	}
	if _, err := Decode(data, "fax.tif", LoadOptions{Page: 2}); !errors.Is(err, ErrFormat) {
		t.Fatalf("page 2 of 2: %v", err)
	}
}

// A CCITT Group 4 multi-page fax at 204×98 dpi written by ImageMagick (a
// general-purpose reference tool), when it is installed.
func TestTIFFFaxG4(t *testing.T) {
	conv, err := exec.LookPath("convert")
	if err != nil {
		t.Skip("ImageMagick convert not installed")
	}
	dir := t.TempDir()
	out := filepath.Join(dir, "fax.tif")
	cmd := exec.Command(conv, "-size", "300x120", "xc:white", "-fill", "black", "-draw", "rectangle 10,10 60,40",
		"(", "-size", "300x120", "xc:black", ")", "-monochrome", "-compress", "Group4", "-units", "PixelsPerInch", "-density", "204x98", out)
	if b, err := cmd.CombinedOutput(); err != nil {
		t.Skipf("convert failed: %v %s", err, b)
	}
	pg, err := Load(out, LoadOptions{Page: 0})
	if err != nil {
		t.Fatal(err)
	}
	// The 98 dpi rows are stretched to 204 dpi: 120 rows become
	// round(120 × 204 / 98) = 250.
	if pg.PageCount != 2 || pg.Image.Bounds().Dx() != 300 || pg.Image.Bounds().Dy() != 250 {
		t.Fatalf("pages %d bounds %v, want 300×250", pg.PageCount, pg.Image.Bounds())
	}
	if st := pg.Stated; st.X != 204 || st.Y != 98 || st.Unit != "inch" || !st.Resampled() {
		t.Fatalf("stated %+v, want 204×98 per inch, resampled", st)
	}
	if math.Abs(pg.DPIX-204) > 0.01 || math.Abs(pg.DPIY-204) > 1 {
		t.Fatalf("dpi after resampling %v×%v, want 204×204", pg.DPIX, pg.DPIY)
	}
	if g := color.GrayModel.Convert(pg.Image.At(30, 42)).(color.Gray).Y; g != 0 {
		t.Fatalf("inside the drawn box grey %d, want black", g)
	}
	pg2, err := Load(out, LoadOptions{Page: 1})
	if err != nil {
		t.Fatal(err)
	}
	if g := color.GrayModel.Convert(pg2.Image.At(150, 60)).(color.Gray).Y; g != 0 {
		t.Fatalf("page 2 should be black, grey %d", g)
	}
}

// minimalPDF writes a PDF (ISO 32000-1 structure: catalog, page tree,
// pages with a content stream each, cross-reference table) whose pages are
// 72×36 pt with a filled black square on the left half.
func minimalPDF(pages int) []byte {
	var b bytes.Buffer
	var offs []int
	obj := func(s string) {
		offs = append(offs, b.Len())
		fmt.Fprintf(&b, "%d 0 obj\n%s\nendobj\n", len(offs), s)
	}
	b.WriteString("%PDF-1.4\n")
	kids := ""
	for i := 0; i < pages; i++ {
		kids += fmt.Sprintf("%d 0 R ", 3+2*i)
	}
	obj("<< /Type /Catalog /Pages 2 0 R >>")
	obj(fmt.Sprintf("<< /Type /Pages /Kids [%s] /Count %d >>", kids, pages))
	for i := 0; i < pages; i++ {
		obj(fmt.Sprintf("<< /Type /Page /Parent 2 0 R /MediaBox [0 0 72 36] /Contents %d 0 R >>", 4+2*i))
		content := "0 0 0 rg 0 0 36 36 re f"
		obj(fmt.Sprintf("<< /Length %d >>\nstream\n%s\nendstream", len(content), content))
	}
	xref := b.Len()
	fmt.Fprintf(&b, "xref\n0 %d\n0000000000 65535 f \n", len(offs)+1)
	for _, o := range offs {
		fmt.Fprintf(&b, "%010d 00000 n \n", o)
	}
	fmt.Fprintf(&b, "trailer\n<< /Size %d /Root 1 0 R >>\nstartxref\n%d\n%%%%EOF\n", len(offs)+1, xref)
	return b.Bytes()
}

// A PDF page rasterised through poppler's pdftoppm (skipped when it is
// not installed): 1 × 0.5 inch at 300 dpi is 300 × 150 px, the left half
// black.
func TestPDFPage(t *testing.T) {
	if _, err := exec.LookPath("pdftoppm"); err != nil {
		t.Skip("pdftoppm not installed")
	}
	out := filepath.Join(t.TempDir(), "p.pdf")
	if err := os.WriteFile(out, minimalPDF(2), 0o600); err != nil {
		t.Fatal(err)
	}
	pg, err := Load(out, LoadOptions{Page: 1})
	if err != nil {
		t.Fatal(err)
	}
	if b := pg.Image.Bounds(); b.Dx() < 299 || b.Dx() > 301 || b.Dy() < 149 || b.Dy() > 151 {
		t.Fatalf("bounds %v, want 300×150", b)
	}
	if pg.PageCount != 2 || pg.Format != "pdf" {
		t.Fatalf("pages %d format %s", pg.PageCount, pg.Format)
	}
	grey := func(x, y int) uint8 { return color.GrayModel.Convert(pg.Image.At(x, y)).(color.Gray).Y }
	if grey(50, 75) > 20 || grey(250, 75) < 235 {
		t.Fatalf("left %d right %d, want black then white", grey(50, 75), grey(250, 75))
	}
	if _, err := Load(out, LoadOptions{Page: 3}); !errors.Is(err, ErrFormat) {
		t.Fatalf("missing page: %v", err)
	}
}

func TestDecodeBadInput(t *testing.T) {
	good := encPNG(t, tinyImage(12, 8))
	noise := make([]byte, 4096)
	for i := range noise {
		noise[i] = byte(i*7919 + i/3)
	}
	for _, c := range []struct {
		name string
		data []byte
		want error
	}{
		{"empty", nil, ErrFormat},
		{"short", []byte("\x89PNG"), ErrFormat},
		{"truncated png", good[:len(good)/2], ErrFormat},
		{"random bytes", noise, ErrFormat},
		{"truncated jpeg", encJPEG(t, tinyImage(12, 8))[:40], ErrFormat},
		// Cut inside the scan (a decoder may fill the rest with grey).
		{"jpeg cut in its scan", cutScan(encJPEG(t, tinyImage(120, 80))), ErrFormat},
		{"truncated tiff", encTIFF(t, tinyImage(12, 8))[:20], ErrFormat},
		{"tiff loop", []byte("II*\x00\x08\x00\x00\x00\x00\x00\x08\x00\x00\x00"), ErrFormat},
		{"pdf junk", []byte("%PDF-1.4 junk junk junk"), ErrFormat},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := Decode(c.data, c.name, LoadOptions{})
			if !errors.Is(err, c.want) {
				t.Fatalf("got %v, want %v", err, c.want)
			}
		})
	}
	if _, err := Load(filepath.Join(t.TempDir(), "missing.png"), LoadOptions{}); err == nil {
		t.Fatal("missing file: no error")
	}
}

// A PNG header declaring 100000×100000 pixels is refused from the header,
// before any pixel memory is taken.
func TestDecodeBombRefused(t *testing.T) {
	data := encPNG(t, tinyImage(2, 2))
	// IHDR width and height sit at bytes 16..23 (PNG spec 11.2.2); the CRC
	// is not checked by DecodeConfig before the size.
	binary.BigEndian.PutUint32(data[16:], 100000)
	binary.BigEndian.PutUint32(data[20:], 100000)
	fixCRC(data[8:])
	_, err := Decode(data, "bomb.png", LoadOptions{})
	if !errors.Is(err, ErrTooBig) {
		t.Fatalf("got %v, want ErrTooBig", err)
	}
	if _, err := Decode(encPNG(t, tinyImage(20, 20)), "x.png", LoadOptions{MaxPixels: 100}); !errors.Is(err, ErrTooBig) {
		t.Fatalf("small budget: %v", err)
	}
	if _, err := Decode(encPNG(t, tinyImage(20, 20)), "x.png", LoadOptions{MaxBytes: 10}); !errors.Is(err, ErrTooBig) {
		t.Fatalf("byte budget: %v", err)
	}
}

// fixCRC recomputes the CRC of the first chunk at c (length, type, data, crc).
func fixCRC(c []byte) {
	n := binary.BigEndian.Uint32(c)
	sum := crc32IEEE(c[4 : 8+n])
	binary.BigEndian.PutUint32(c[8+n:], sum)
}

func FuzzDecode(f *testing.F) {
	f.Add(encPNG(f, tinyImage(3, 2)))
	f.Add(encJPEG(f, tinyImage(3, 2)))
	f.Add(encTIFF(f, tinyImage(3, 2)))
	f.Add(twoPageTIFF(3, 2, 10, 20))
	f.Add([]byte("II*\x00\x08\x00\x00\x00"))
	if fax, err := samples.WriteTIFF([]samples.TIFFPage{{Image: tinyImage(9, 4), DPIX: 204, DPIY: 98, Bilevel: true}, {Image: tinyImage(5, 5)}}); err == nil {
		f.Add(fax) // two pages, the first of non-square pixels
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		if bytes.HasPrefix(bytes.TrimLeft(data, "\x00\t\r\n "), []byte("%PDF-")) {
			return // PDFs go to an external tool; not fuzzed here
		}
		pg, err := Decode(data, "fuzz", LoadOptions{MaxPixels: 1 << 20})
		if err != nil {
			if pg != nil {
				t.Fatal("page with an error")
			}
			return
		}
		if pg.Image == nil || pg.Image.Bounds().Empty() {
			t.Fatal("no error and no image")
		}
		// Every page of the document decodes or fails cleanly, and the
		// quick screen looks at it without trouble.
		if doc, err := NewDocument(data, "fuzz", LoadOptions{MaxPixels: 1 << 20}); err == nil {
			for i := 0; i < min(doc.Pages, 4); i++ {
				if p, err := doc.Preview(i); err == nil {
					Screen(p)
				}
			}
		}
	})
}

func crc32IEEE(b []byte) uint32 { return crc32.ChecksumIEEE(b) }

// pngHeader writes a PNG of IHDR, one small IDAT and IEND only (PNG spec
// 5.2 signature, 11.2.2 IHDR: width, height, bit depth, colour type,
// compression, filter, interlace), so a huge declared size costs nothing.
func pngHeader(w, h uint32, depth, colourType byte) []byte {
	chunk := func(typ string, body []byte) []byte {
		c := make([]byte, 8+len(body)+4)
		binary.BigEndian.PutUint32(c, uint32(len(body)))
		copy(c[4:], typ)
		copy(c[8:], body)
		binary.BigEndian.PutUint32(c[8+len(body):], crc32IEEE(c[4:8+len(body)]))
		return c
	}
	ihdr := make([]byte, 13)
	binary.BigEndian.PutUint32(ihdr, w)
	binary.BigEndian.PutUint32(ihdr[4:], h)
	ihdr[8], ihdr[9] = depth, colourType
	out := []byte("\x89PNG\r\n\x1a\n")
	out = append(out, chunk("IHDR", ihdr)...)
	// An empty zlib stream (RFC 1950 header 78 9c, a final stored block of
	// length 0, Adler-32 of nothing = 1).
	out = append(out, chunk("IDAT", []byte{0x78, 0x9c, 0x01, 0x00, 0x00, 0xff, 0xff, 0, 0, 0, 1})...)
	return append(out, chunk("IEND", nil)...)
}

// A 14000×14000 PNG at 16 bits a channel, RGBA (colour type 6), is under the
// pixel budget (196e6 < 200e6) but would take 14000·14000·8 bytes ≈ 1.5 GB
// as image.NRGBA64: it is refused from the header, before decoding. The same
// size at 8-bit grey (196 MB) stays within the budget.
func TestDecodeDeepPNGRefused(t *testing.T) {
	data := pngHeader(14000, 14000, 16, 6)
	cfg, err := png.DecodeConfig(bytes.NewReader(data))
	if err != nil {
		t.Fatalf("test header does not parse: %v", err)
	}
	if cfg.ColorModel != color.NRGBA64Model {
		t.Fatalf("test header decodes as %T, want NRGBA64", cfg.ColorModel)
	}
	_, err = Decode(data, "deep.png", LoadOptions{})
	if !errors.Is(err, ErrTooBig) {
		t.Fatalf("got %v, want ErrTooBig", err)
	}
	for _, want := range []string{"deep.png", "14000×14000", "8 bytes a pixel", "8 bits per channel"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("message %q lacks %q", err, want)
		}
	}
	grey, err := png.DecodeConfig(bytes.NewReader(pngHeader(14000, 14000, 8, 0)))
	if err != nil {
		t.Fatal(err)
	}
	if err := checkSize("grey.png", grey.Width, grey.Height, modelBytes(grey.ColorModel), LoadOptions{}); err != nil {
		t.Errorf("8-bit grey of the same size refused: %v", err)
	}
	// TIFF: 16 bits a sample, 3 samples (TIFF 6.0 tags 258, 277) decodes to
	// RGBA64 in x/image/tiff, 8 bytes a pixel; 8-bit grey to 1.
	if got := tiffBytes(16, 3); got != 8 {
		t.Errorf("tiffBytes(16,3) = %d, want 8", got)
	}
	if got := tiffBytes(8, 1); got != 1 {
		t.Errorf("tiffBytes(8,1) = %d, want 1", got)
	}
}
