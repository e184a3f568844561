package calib

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/jpeg"
	"image/png"
	"io"
	"os"
	"path/filepath"

	"golang.org/x/image/tiff"
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

func decodeJPEG(data []byte, name string, opt LoadOptions, pg *Page) error {
	if err := pageOnly(name, opt); err != nil {
		return err
	}
	cfg, err := jpeg.DecodeConfig(bytes.NewReader(data))
	if err != nil {
		return fmt.Errorf("calib: %s: damaged JPEG (%v): %w", name, err, ErrFormat)
	}
	// JPEG is 8 bits a sample: grey decodes to 1 byte a pixel, colour to
	// YCbCr (3 bytes) or CMYK (4); count 4 for colour.
	if err := checkSize(name, cfg.Width, cfg.Height, modelBytes(cfg.ColorModel), opt); err != nil {
		return err
	}
	img, err := jpeg.Decode(bytes.NewReader(data))
	if err != nil {
		return fmt.Errorf("calib: %s: damaged JPEG (%v): %w", name, err, ErrFormat)
	}
	orient, dx, dy := jpegMeta(data)
	pg.DPIX, pg.DPIY = dx, dy
	if orient > 1 && orient <= 8 {
		img = orientImage(img, orient)
		if orient >= 5 {
			pg.DPIX, pg.DPIY = pg.DPIY, pg.DPIX
		}
	}
	pg.Image = img
	if pg.DPIX > 0 && pg.DPIY > 0 {
		pg.Stated = Resolution{X: pg.DPIX, Y: pg.DPIY, Unit: "inch", From: "JPEG JFIF or EXIF"}
	}
	return nil
}

// jpegMeta walks the JPEG markers before the first scan and returns the
// EXIF orientation (TIFF tag 274, 1..8) and the density from JFIF (APP0) or
// EXIF resolution tags.
func jpegMeta(data []byte) (orient int, dpix, dpiy float64) {
	p := 2
	for p+4 <= len(data) {
		if data[p] != 0xFF {
			return
		}
		m := data[p+1]
		if m == 0xD8 || m == 0x01 || (m >= 0xD0 && m <= 0xD7) {
			p += 2
			continue
		}
		if m == 0xDA || m == 0xD9 {
			return
		}
		n := int(binary.BigEndian.Uint16(data[p+2:]))
		if n < 2 || p+2+n > len(data) {
			return
		}
		seg := data[p+4 : p+2+n]
		switch {
		case m == 0xE0 && len(seg) >= 12 && string(seg[:5]) == "JFIF\x00":
			unit := seg[7]
			x := float64(binary.BigEndian.Uint16(seg[8:]))
			y := float64(binary.BigEndian.Uint16(seg[10:]))
			if unit == 1 && dpix == 0 {
				dpix, dpiy = x, y
			} else if unit == 2 && dpix == 0 {
				dpix, dpiy = x*2.54, y*2.54
			}
		case m == 0xE1 && len(seg) >= 14 && string(seg[:6]) == "Exif\x00\x00":
			o, x, y := exifFields(seg[6:])
			if o != 0 {
				orient = o
			}
			if x > 0 && y > 0 {
				dpix, dpiy = x, y
			}
		}
		p += 2 + n
	}
	return
}

// exifFields reads orientation and resolution from the first IFD of an EXIF
// TIFF block.
func exifFields(t []byte) (orient int, dpix, dpiy float64) {
	bo, ok := tiffOrder(t)
	if !ok {
		return
	}
	off := int64(bo.Uint32(t[4:]))
	ents, err := readIFD(t, bo, off)
	if err != nil {
		return
	}
	unit := uint32(2)
	for _, e := range ents {
		switch e.tag {
		case 274:
			orient = int(e.val(t, bo))
		case 282:
			dpix = e.rational(t, bo)
		case 283:
			dpiy = e.rational(t, bo)
		case 296:
			unit = e.val(t, bo)
		}
	}
	if unit == 3 {
		dpix, dpiy = dpix*2.54, dpiy*2.54
	} else if unit != 2 {
		dpix, dpiy = 0, 0
	}
	return
}

// orientImage applies EXIF orientation o (2..8) so the picture is shown
// the way the phone held it. One copy of the pixels.
func orientImage(src image.Image, o int) image.Image {
	b := src.Bounds()
	w, h := b.Dx(), b.Dy()
	in := toNRGBA(src)
	ow, oh := w, h
	if o >= 5 {
		ow, oh = h, w
	}
	out := image.NewNRGBA(image.Rect(0, 0, ow, oh))
	for y := 0; y < h; y++ {
		row := in.Pix[y*in.Stride:]
		for x := 0; x < w; x++ {
			var nx, ny int
			switch o {
			case 2:
				nx, ny = w-1-x, y
			case 3:
				nx, ny = w-1-x, h-1-y
			case 4:
				nx, ny = x, h-1-y
			case 5:
				nx, ny = y, x
			case 6:
				nx, ny = h-1-y, x
			case 7:
				nx, ny = h-1-y, w-1-x
			case 8:
				nx, ny = y, w-1-x
			}
			copy(out.Pix[ny*out.Stride+nx*4:ny*out.Stride+nx*4+4], row[x*4:x*4+4])
		}
	}
	return out
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

// ---- TIFF ----

type ifdEntry struct {
	tag, typ uint16
	count    uint32
	raw      [4]byte
}

func tiffOrder(t []byte) (binary.ByteOrder, bool) {
	if len(t) < 8 {
		return nil, false
	}
	switch string(t[:4]) {
	case "II*\x00":
		return binary.LittleEndian, true
	case "MM\x00*":
		return binary.BigEndian, true
	}
	return nil, false
}

var errIFD = errors.New("bad IFD")

func readIFD(t []byte, bo binary.ByteOrder, off int64) ([]ifdEntry, error) {
	if off < 8 || off+2 > int64(len(t)) {
		return nil, errIFD
	}
	n := int64(bo.Uint16(t[off:]))
	if off+2+12*n+4 > int64(len(t)) {
		return nil, errIFD
	}
	out := make([]ifdEntry, n)
	for i := int64(0); i < n; i++ {
		e := t[off+2+12*i:]
		out[i] = ifdEntry{tag: bo.Uint16(e), typ: bo.Uint16(e[2:]), count: bo.Uint32(e[4:])}
		copy(out[i].raw[:], e[8:12])
	}
	return out, nil
}

// val returns a SHORT or LONG first value.
func (e ifdEntry) val(_ []byte, bo binary.ByteOrder) uint32 {
	switch e.typ {
	case 3:
		return uint32(bo.Uint16(e.raw[:]))
	case 4:
		return bo.Uint32(e.raw[:])
	}
	return 0
}

// first returns the first SHORT or LONG value, also when the values do not
// fit in the entry and it holds their offset (BitsPerSample of RGB).
func (e ifdEntry) first(t []byte, bo binary.ByteOrder) uint32 {
	size := map[uint16]uint32{3: 2, 4: 4}[e.typ]
	if size == 0 || e.count*size <= 4 {
		return e.val(t, bo)
	}
	off := int64(bo.Uint32(e.raw[:]))
	if off < 0 || off+int64(size) > int64(len(t)) {
		return 0
	}
	if size == 2 {
		return uint32(bo.Uint16(t[off:]))
	}
	return bo.Uint32(t[off:])
}

// tiffBytes is the bytes per pixel x/image/tiff allocates: grey or
// palette 1 (2 at 16 bits), colour RGBA 4 (RGBA64 8 at 16 bits).
func tiffBytes(bits, spp uint32) int {
	per := 1
	if bits > 8 {
		per = 2
	}
	if spp >= 3 {
		return 4 * per
	}
	return per
}

func (e ifdEntry) rational(t []byte, bo binary.ByteOrder) float64 {
	if e.typ != 5 {
		return 0
	}
	off := int64(bo.Uint32(e.raw[:]))
	if off < 0 || off+8 > int64(len(t)) {
		return 0
	}
	n, d := bo.Uint32(t[off:]), bo.Uint32(t[off+4:])
	if d == 0 {
		return 0
	}
	return float64(n) / float64(d)
}

// tiffPages walks the IFD chain and returns each page's IFD offset.
// The walk stops at a loop or at 10000 pages.
func tiffPages(t []byte, bo binary.ByteOrder) ([]int64, error) {
	var offs []int64
	seen := map[int64]bool{}
	off := int64(bo.Uint32(t[4:]))
	for off != 0 && len(offs) < 10000 {
		if seen[off] {
			break
		}
		seen[off] = true
		ents, err := readIFD(t, bo, off)
		if err != nil {
			if len(offs) > 0 {
				break // a damaged tail: keep the pages already found
			}
			return nil, err
		}
		offs = append(offs, off)
		next := off + 2 + 12*int64(len(ents))
		off = int64(bo.Uint32(t[next:]))
	}
	return offs, nil
}

// headerOverlay reads like data except that bytes 4..7 (the offset of the
// first IFD) point at the chosen page. x/image/tiff decodes only the first
// IFD; this lets it decode page N without copying the file.
type headerOverlay struct {
	data []byte
	hdr  [8]byte
	pos  int64
}

func (h *headerOverlay) ReadAt(p []byte, off int64) (int, error) {
	if off < 0 {
		return 0, errors.New("negative offset")
	}
	if off >= int64(len(h.data)) {
		return 0, io.EOF
	}
	n := copy(p, h.data[off:])
	for i := 0; i < n && off+int64(i) < 8; i++ {
		p[i] = h.hdr[off+int64(i)]
	}
	if n < len(p) {
		return n, io.EOF
	}
	return n, nil
}

func (h *headerOverlay) Read(p []byte) (int, error) {
	n, err := h.ReadAt(p, h.pos)
	h.pos += int64(n)
	return n, err
}

func decodeTIFF(data []byte, name string, opt LoadOptions, pg *Page) error {
	bo, _ := tiffOrder(data)
	offs, err := tiffPages(data, bo)
	if err != nil || len(offs) == 0 {
		return fmt.Errorf("calib: %s: damaged TIFF (no readable page directory): %w", name, ErrFormat)
	}
	pg.PageCount = len(offs)
	pg.PageIndex = opt.Page
	if opt.Page >= len(offs) {
		return fmt.Errorf("calib: %s has %d page(s); page %d does not exist (pages count from 1): %w", name, len(offs), opt.Page+1, ErrFormat)
	}
	ents, _ := readIFD(data, bo, offs[opt.Page])
	var w, h uint32
	bits, spp := uint32(1), uint32(1) // TIFF 6.0 defaults
	var xres, yres float64
	unit, unitGiven := uint32(tiffResUnitInch), false // TIFF 6.0: inch unless stated
	for _, e := range ents {
		switch e.tag {
		case 256:
			w = e.val(data, bo)
		case 257:
			h = e.val(data, bo)
		case 258:
			bits = e.first(data, bo)
		case 277:
			spp = e.val(data, bo)
		case 282:
			xres = e.rational(data, bo)
		case 283:
			yres = e.rational(data, bo)
		case 296:
			unit, unitGiven = e.val(data, bo), true
		}
	}
	pg.Stated, pg.DPIX, pg.DPIY = tiffResolution(xres, yres, unit, unitGiven)
	if err := checkSize(name, int(w), int(h), tiffBytes(bits, spp), opt); err != nil {
		return err
	}
	ov := &headerOverlay{data: data}
	copy(ov.hdr[:], data[:8])
	bo.PutUint32(ov.hdr[4:], uint32(offs[opt.Page]))
	img, err := decodeTIFFSafe(ov)
	if err != nil {
		return fmt.Errorf("calib: %s page %d: damaged or unsupported TIFF (%v): %w", name, opt.Page+1, err, ErrFormat)
	}
	pg.Image = img
	return nil
}

// decodeTIFFSafe turns a decoder panic on hostile input into an error.
func decodeTIFFSafe(r io.Reader) (img image.Image, err error) {
	defer func() {
		if p := recover(); p != nil {
			img, err = nil, fmt.Errorf("decoder failure: %v", p)
		}
	}()
	return tiff.Decode(r)
}

// stem is the file name without folder, for messages.
func stem(path string) string { return filepath.Base(path) }
