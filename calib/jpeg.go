package calib

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"image"
	"image/jpeg"
)

// decodeJPEG decodes with the standard library. OpenCV is faster: on one
// core (taskset -c 0 go test -bench DecodeJPEG -run '^$' ./calib/, an A4
// page rendered at 256 dpi, 2993×2117 px = 6.3 MP, colour, quality 90,
// 2.1 MB; the machine shared, two runs) image/jpeg takes 89.3, 89.8 ms
// and OpenCV 53.7, 53.9 ms with the conversion to *image.NRGBA, and a
// phone photo's whole digitize goes from 0.95 to 0.74 s. But libjpeg's
// pixels differ from image/jpeg's by about a level (its chroma is
// interpolated), and on the bench (--cases 100 --seed 1) 29 of the JPEG
// pages move by more than 0.1 dB, 16 up and 13 down, one darktable page
// from 10.2 dB to a grid read at twice its scale; on seed 2 the median
// goes 16.1 -> 16.0 dB, 8 pages up and 10 down, and a darktable page's
// scale is read 236 % off. A page read at the wrong scale looks finished,
// so until calib's marginal decisions are steadier the standard library
// stays.
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
