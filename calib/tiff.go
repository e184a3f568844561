package calib

import (
	"encoding/binary"
	"errors"
	"fmt"
	"image"
	"io"

	"golang.org/x/image/tiff"
)

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
