package calib

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/jpeg"
	"runtime"

	"gocv.io/x/gocv"
)

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
	img, err := decodeJPEGPixels(data, cfg)
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

// decodeJPEGPixels decodes a JPEG whose header cfg has been read (and
// its size allowed). Colour and grey JPEGs go through OpenCV (libjpeg),
// which is faster than the standard library. On one core (taskset -c 0
// go test -bench DecodeJPEG -run '^$' ./calib/: an A4 page rendered at
// 256 dpi, 2993×2117 px = 6.3 MP, colour, quality 90, 2.1 MB; the
// machine shared, two runs):
//
//	standard library (image/jpeg, to *image.YCbCr)        89.3, 89.8 ms
//	OpenCV (IMDecode, BGR converted into *image.NRGBA)    53.7, 53.9 ms
//
// and its *image.NRGBA is read by calib's fast paths, where a YCbCr
// picture is converted pixel by pixel.
// EXIF orientation is left to decodeJPEG (IMReadIgnoreOrientation), so it
// is applied once. CMYK and other rare kinds stay with the standard
// library. libjpeg decodes a file cut short in its scan as far as it
// goes; the standard library refuses it, and so do we: a JPEG without its
// end marker after the scan is damaged.
func decodeJPEGPixels(data []byte, cfg image.Config) (image.Image, error) {
	var flags gocv.IMReadFlag
	ch := 0
	switch cfg.ColorModel {
	case color.YCbCrModel:
		flags, ch = gocv.IMReadColor|gocv.IMReadIgnoreOrientation, 4
	case color.GrayModel:
		flags, ch = gocv.IMReadGrayScale|gocv.IMReadIgnoreOrientation, 1
	default:
		return jpeg.Decode(bytes.NewReader(data))
	}
	if !jpegComplete(data) {
		return nil, errors.New("the file ends before the picture does")
	}
	m, err := gocv.IMDecode(data, flags)
	if err != nil {
		return nil, err
	}
	defer m.Close()
	if m.Empty() || m.Cols() != cfg.Width || m.Rows() != cfg.Height {
		return nil, errors.New("the picture's data cannot be decoded")
	}
	if ch == 1 {
		out := image.NewGray(image.Rect(0, 0, cfg.Width, cfg.Height))
		data, err := m.DataPtrUint8()
		if err != nil || len(data) != len(out.Pix) {
			return nil, errors.New("the picture's data cannot be decoded")
		}
		copy(out.Pix, data)
		return out, nil
	}
	// BGR to RGBA straight into the Go image's pixels (OpenCV keeps a
	// destination of the right size and type).
	out := image.NewNRGBA(image.Rect(0, 0, cfg.Width, cfg.Height))
	dst, err := gocv.NewMatFromBytes(cfg.Height, cfg.Width, gocv.MatTypeCV8UC4, out.Pix)
	if err != nil {
		return nil, err
	}
	defer dst.Close()
	gocv.CvtColor(m, &dst, gocv.ColorBGRToRGBA)
	got, err := dst.DataPtrUint8()
	if err != nil || len(got) != len(out.Pix) {
		return nil, errors.New("the picture's data cannot be decoded")
	}
	if &got[0] != &out.Pix[0] {
		copy(out.Pix, got) // OpenCV chose its own buffer after all
	}
	runtime.KeepAlive(out.Pix)
	return out, nil
}

// jpegComplete reports whether an end-of-image marker follows the first
// start-of-scan, found by walking the marker segments (an EXIF thumbnail
// inside APP1 has scan and end markers of its own). Inside the
// entropy-coded data a 0xFF byte is followed by 0x00 or a restart
// marker, so a 0xFFD9 after the scan starts is the end.
func jpegComplete(data []byte) bool {
	p := 2
	for p+4 <= len(data) {
		if data[p] != 0xFF {
			return false
		}
		m := data[p+1]
		if m == 0xFF {
			p++ // fill byte
			continue
		}
		if m == 0xD8 || m == 0x01 || (m >= 0xD0 && m <= 0xD7) {
			p += 2
			continue
		}
		if m == 0xD9 {
			return false
		}
		if m == 0xDA {
			return bytes.LastIndex(data[p:], []byte{0xFF, 0xD9}) > 0
		}
		p += 2 + int(binary.BigEndian.Uint16(data[p+2:]))
	}
	return false
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
