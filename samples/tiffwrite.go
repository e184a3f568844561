package samples

import (
	"encoding/binary"
	"errors"
	"image"
	"math"
)

// EncodeTIFF writes pages as one TIFF file (TIFF 6.0, little-endian, one
// strip per page, no compression), each page carrying its resolution
// (dpiX × dpiY, unit inch; 0 leaves the tags out). bilevel writes 1 bit
// per pixel, 0 = white (WhiteIsZero, as fax files do) with the threshold
// at mid-grey; otherwise 8-bit grey. x/image/tiff writes a single page
// without chosen resolution tags, so the pages of a fax document are
// written here.
func EncodeTIFF(pages []*image.NRGBA, dpiX, dpiY float64, bilevel bool) ([]byte, error) {
	if len(pages) == 0 {
		return nil, errors.New("samples: no pages to write")
	}
	le := binary.LittleEndian
	out := []byte{'I', 'I', 42, 0, 0, 0, 0, 0}
	prevNext := 4 // where the offset of the next IFD is written
	for _, pg := range pages {
		if pg == nil || pg.Rect.Empty() {
			return nil, errors.New("samples: empty page")
		}
		W, H := pg.Rect.Dx(), pg.Rect.Dy()
		var data []byte
		bps := 8
		photometric := 1 // BlackIsZero
		if bilevel {
			bps, photometric = 1, 0
			rowB := (W + 7) / 8
			data = make([]byte, rowB*H)
			for y := 0; y < H; y++ {
				for x := 0; x < W; x++ {
					o := y*pg.Stride + 4*x
					l := 299*int(pg.Pix[o]) + 587*int(pg.Pix[o+1]) + 114*int(pg.Pix[o+2])
					if l < 128000 {
						data[y*rowB+x/8] |= 0x80 >> (x % 8)
					}
				}
			}
		} else {
			data = make([]byte, W*H)
			for y := 0; y < H; y++ {
				for x := 0; x < W; x++ {
					o := y*pg.Stride + 4*x
					data[y*W+x] = uint8((299*int(pg.Pix[o]) + 587*int(pg.Pix[o+1]) + 114*int(pg.Pix[o+2]) + 500) / 1000)
				}
			}
		}
		stripOff := len(out)
		out = append(out, data...)
		if len(out)%2 == 1 {
			out = append(out, 0) // IFDs start on a word boundary
		}
		type entry struct {
			tag, typ uint16
			val      uint32
		}
		ents := []entry{
			{256, 4, uint32(W)}, {257, 4, uint32(H)}, {258, 3, uint32(bps)}, {259, 3, 1},
			{262, 3, uint32(photometric)}, {273, 4, uint32(stripOff)}, {277, 3, 1},
			{278, 4, uint32(H)}, {279, 4, uint32(len(data))},
		}
		withRes := dpiX > 0 && dpiY > 0
		ifd := len(out)
		n := len(ents)
		if withRes {
			n += 3
		}
		ratOff := ifd + 2 + 12*n + 4
		if withRes {
			ents = append(ents, entry{282, 5, uint32(ratOff)}, entry{283, 5, uint32(ratOff + 8)}, entry{296, 3, 2})
		}
		le.PutUint32(out[prevNext:], uint32(ifd))
		out = le.AppendUint16(out, uint16(len(ents)))
		for _, e := range ents {
			out = le.AppendUint16(out, e.tag)
			out = le.AppendUint16(out, e.typ)
			out = le.AppendUint32(out, 1)
			if e.typ == 3 {
				out = le.AppendUint16(out, uint16(e.val))
				out = le.AppendUint16(out, 0)
			} else {
				out = le.AppendUint32(out, e.val)
			}
		}
		prevNext = len(out)
		out = le.AppendUint32(out, 0)
		if withRes {
			for _, d := range []float64{dpiX, dpiY} {
				out = le.AppendUint32(out, uint32(math.Round(d*100)))
				out = le.AppendUint32(out, 100)
			}
		}
		if len(out) > 1<<31 {
			return nil, errors.New("samples: TIFF too large")
		}
	}
	return out, nil
}
