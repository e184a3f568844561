package calib

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/png"
	"os"
	"path/filepath"
)

// LoadOptions bound what Load and Decode accept. The zero value is usable.
type LoadOptions struct {
	Page      int   // 0-based page of a multi-page TIFF or PDF
	MaxPixels int64 // pixel budget checked from the header before decoding; 0 = 200e6
	MaxBytes  int64 // file size budget; 0 = 200 MB
	// Context, when set, stops the helper programs (poppler for a PDF)
	// when it is cancelled.
	Context context.Context
	// PDFDPI is the resolution a PDF page is rendered at; 0 chooses it
	// from the page's size (see pdfResolution).
	PDFDPI int
}

const (
	defaultMaxPixels = 200e6
	defaultMaxBytes  = 200 << 20
)

func (o LoadOptions) maxPixels() int64 {
	if o.MaxPixels <= 0 {
		return defaultMaxPixels
	}
	return o.MaxPixels
}

func (o LoadOptions) maxBytes() int64 {
	if o.MaxBytes <= 0 {
		return defaultMaxBytes
	}
	return o.MaxBytes
}

// Load reads an image file (PNG, JPEG, TIFF incl. CCITT fax and multi-page,
// PDF through poppler's pdftoppm) and returns the chosen page. Errors wrap
// ErrFormat or ErrTooBig and name the file and what to do.
func Load(path string, opt LoadOptions) (*Page, error) {
	data, err := readImageFile(path, opt)
	if err != nil {
		return nil, err
	}
	return Decode(data, path, opt)
}

// readImageFile reads the image file at path within the byte budget.
func readImageFile(path string, opt LoadOptions) ([]byte, error) {
	fi, err := os.Stat(path)
	if err != nil {
		return nil, fmt.Errorf("calib: %s: %w", path, err)
	}
	if fi.IsDir() {
		return nil, fmt.Errorf("calib: %s is a folder, not an image file: %w", path, ErrFormat)
	}
	if !fi.Mode().IsRegular() { // a FIFO blocks, /dev/zero never ends
		return nil, fmt.Errorf("calib: %s is not a regular file (%v); give an image file saved on disk: %w", path, fi.Mode().Type(), ErrFormat)
	}
	if fi.Size() > opt.maxBytes() {
		return nil, fmt.Errorf("calib: %s is %d bytes, over the %d byte limit; scan at a lower resolution or raise the limit: %w",
			path, fi.Size(), opt.maxBytes(), ErrTooBig)
	}
	return readBounded(path, opt.maxBytes())
}

// Decode is Load on bytes already in memory; name is used in messages and
// kept as Page.Path.
func Decode(data []byte, name string, opt LoadOptions) (*Page, error) {
	if name == "" {
		name = "image"
	}
	if int64(len(data)) > opt.maxBytes() {
		return nil, fmt.Errorf("calib: %s is %d bytes, over the %d byte limit: %w", name, len(data), opt.maxBytes(), ErrTooBig)
	}
	if len(data) < 8 {
		return nil, fmt.Errorf("calib: %s is empty or too short to be an image; give a PNG, JPEG, TIFF or PDF file: %w", name, ErrFormat)
	}
	if opt.Page < 0 {
		return nil, fmt.Errorf("calib: %s: page %d does not exist (pages count from 1): %w", name, opt.Page+1, ErrFormat)
	}
	sum := sha256.Sum256(data)
	pg := &Page{Path: name, SHA256: hex.EncodeToString(sum[:]), PageCount: 1}
	var err error
	switch {
	case bytes.HasPrefix(data, []byte("\x89PNG\r\n\x1a\n")):
		pg.Format = "png"
		err = decodePNG(data, name, opt, pg)
	case bytes.HasPrefix(data, []byte{0xFF, 0xD8, 0xFF}):
		pg.Format = "jpeg"
		err = decodeJPEG(data, name, opt, pg)
	case bytes.HasPrefix(data, []byte("II*\x00")), bytes.HasPrefix(data, []byte("MM\x00*")):
		pg.Format = "tiff"
		err = decodeTIFF(data, name, opt, pg)
	case bytes.HasPrefix(bytes.TrimLeft(data[:min(len(data), 1024)], "\x00\t\r\n "), []byte("%PDF-")):
		pg.Format = "pdf"
		err = decodePDF(data, name, opt, pg)
	default:
		return nil, fmt.Errorf("calib: %s is not a PNG, JPEG, TIFF or PDF file; save the picture in one of these formats: %w", name, ErrFormat)
	}
	if err != nil {
		return nil, err
	}
	if pg.PageIndex >= pg.PageCount && pg.PageCount > 0 {
		return nil, fmt.Errorf("calib: %s has %d page(s); page %d does not exist (pages count from 1): %w", name, pg.PageCount, pg.PageIndex+1, ErrFormat)
	}
	b := pg.Image.Bounds()
	if b.Dx() < 1 || b.Dy() < 1 {
		return nil, fmt.Errorf("calib: %s holds an empty image: %w", name, ErrFormat)
	}
	if err := squarePixels(pg, name, opt); err != nil {
		return nil, err
	}
	return pg, nil
}

// checkSize rejects a header size over the pixel budget before anything is
// allocated (a decompression bomb declares its size honestly in the header).
// bpp is the bytes per pixel of the image the decoder will allocate (8 for
// 16-bit RGBA, 1 for 8-bit grey); the decoded bytes must stay within the
// memory budget, which is the pixel budget at 4 bytes a pixel (an 8-bit
// RGBA page of the largest size allowed). bpp <= 0 counts as 4.
func checkSize(name string, w, h, bpp int, opt LoadOptions) error {
	if w <= 0 || h <= 0 {
		return fmt.Errorf("calib: %s declares an empty %d×%d image: %w", name, w, h, ErrFormat)
	}
	if int64(w)*int64(h) > opt.maxPixels() {
		return fmt.Errorf("calib: %s is %d×%d pixels, over the budget of %d; scan at a lower resolution (300 dpi is plenty) or raise the limit: %w",
			name, w, h, opt.maxPixels(), ErrTooBig)
	}
	if bpp <= 0 {
		bpp = 4
	}
	if need, budget := int64(w)*int64(h)*int64(bpp), opt.maxPixels()*4; need > budget {
		return fmt.Errorf("calib: %s is %d×%d pixels at %d bytes a pixel, %d MB once decoded, over the memory budget of %d MB; save it with 8 bits per channel or at a lower resolution (300 dpi is plenty): %w",
			name, w, h, bpp, need>>20, budget>>20, ErrTooBig)
	}
	return nil
}

// modelBytes is the bytes per pixel the standard decoders allocate for a
// colour model (image/png picks the image type from the colour model).
func modelBytes(m color.Model) int {
	switch m {
	case color.GrayModel, color.AlphaModel:
		return 1
	case color.Gray16Model, color.Alpha16Model:
		return 2
	case color.RGBA64Model, color.NRGBA64Model:
		return 8
	}
	if _, ok := m.(color.Palette); ok {
		return 1
	}
	return 4
}

func pageOnly(name string, opt LoadOptions) error {
	if opt.Page != 0 {
		return fmt.Errorf("calib: %s has a single page; page %d does not exist (pages count from 1): %w", name, opt.Page+1, ErrFormat)
	}
	return nil
}

// decodePNG decodes with the standard library. OpenCV was not faster
// here in an earlier measurement (170 against 126 ms for a 300-dpi page);
// BenchmarkDecodePNG (taskset -c 0 go test -bench DecodePNG -run '^$'
// ./calib/, a 300-dpi A4 photocopy render, 3508×2480 RGB, 5.3 MB, the
// machine shared) now reads 207, 206 ms for the standard library against
// 157, 160 ms for OpenCV with the conversion to *image.NRGBA, so the
// choice is open again; the standard library also keeps a paletted,
// grey or 16-bit PNG's own image type, which calib reads (a bilevel
// picture), where OpenCV would expand it to BGR or 16-bit Mats.
func decodePNG(data []byte, name string, opt LoadOptions, pg *Page) error {
	if err := pageOnly(name, opt); err != nil {
		return err
	}
	cfg, err := png.DecodeConfig(bytes.NewReader(data))
	if err != nil {
		return fmt.Errorf("calib: %s: damaged PNG (%v): %w", name, err, ErrFormat)
	}
	if err := checkSize(name, cfg.Width, cfg.Height, modelBytes(cfg.ColorModel), opt); err != nil {
		return err
	}
	img, err := png.Decode(bytes.NewReader(data))
	if err != nil {
		return fmt.Errorf("calib: %s: damaged PNG (%v): %w", name, err, ErrFormat)
	}
	pg.Image = img
	pg.DPIX, pg.DPIY = pngDPI(data)
	if pg.DPIX > 0 && pg.DPIY > 0 {
		pg.Stated = Resolution{X: pg.DPIX, Y: pg.DPIY, Unit: "inch", From: "PNG pHYs (pixels per metre)"}
	}
	return nil
}

// pngDPI reads the pHYs chunk (PNG spec 11.3.5.3: pixels per unit, unit 1 =
// metre).
func pngDPI(data []byte) (float64, float64) {
	p := 8
	for p+12 <= len(data) {
		n := int(binary.BigEndian.Uint32(data[p:]))
		typ := string(data[p+4 : p+8])
		if n < 0 || p+12+n > len(data) {
			return 0, 0
		}
		if typ == "pHYs" && n == 9 {
			c := data[p+8:]
			x := float64(binary.BigEndian.Uint32(c))
			y := float64(binary.BigEndian.Uint32(c[4:]))
			if c[8] == 1 {
				return x * 0.0254, y * 0.0254
			}
			return 0, 0
		}
		if typ == "IDAT" || typ == "IEND" {
			return 0, 0
		}
		p += 12 + n
	}
	return 0, 0
}

// toNRGBA returns src as *image.NRGBA with origin (0,0), copying only
// when it is another type or offset.
func toNRGBA(src image.Image) *image.NRGBA {
	if n, ok := src.(*image.NRGBA); ok && n.Rect.Min == (image.Point{}) {
		return n
	}
	b := src.Bounds()
	out := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
	switch s := src.(type) {
	case *image.Gray:
		for y := 0; y < b.Dy(); y++ {
			sr := s.Pix[(y)*s.Stride : y*s.Stride+b.Dx()]
			dr := out.Pix[y*out.Stride:]
			for x, v := range sr {
				dr[4*x], dr[4*x+1], dr[4*x+2], dr[4*x+3] = v, v, v, 255
			}
		}
	default:
		draw.Draw(out, out.Rect, src, b.Min, draw.Src)
	}
	return out
}

// stem is the file name without folder, for messages.
func stem(path string) string { return filepath.Base(path) }
