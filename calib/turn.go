package calib

import (
	"encoding/binary"
	"image"
	"math"
	"sort"
)

// pooledInk marks the blocks of bs×bs ink pixels that hold strong ink.
type pooledInk struct {
	on    []bool
	w, h  int
	bs    int
	trace func(format string, a ...any) // Options.Trace
}

// poolInk pools the ink map to about 4 px/mm; a block is on when it holds
// ink of at least thr (see inkThreshold). At the usual threshold of 128
// strong ink has its top bit set, so eight pixels are tested at once.
func poolInk(ink *image.Gray, s float64, thr uint8) *pooledInk {
	bs := max(1, int(math.Round(s/4)))
	W, H := ink.Rect.Dx(), ink.Rect.Dy()
	w, h := W/bs, H/bs
	p := &pooledInk{on: make([]bool, w*h), w: w, h: h, bs: bs}
	if w < 1 || h < 1 {
		return p
	}
	const hi = 0x8080808080808080
	n := w * bs
	for y := 0; y < h*bs; y++ {
		row := ink.Pix[y*ink.Stride : y*ink.Stride+n]
		on := p.on[(y/bs)*w : (y/bs)*w+w]
		if thr != 128 {
			// Paper is 0: eight pixels of it are skipped at once.
			x := 0
			for ; x+8 <= n; x += 8 {
				if binary.LittleEndian.Uint64(row[x:x+8]) == 0 {
					continue
				}
				for j := x; j < x+8; j++ {
					if row[j] >= thr {
						on[j/bs] = true
					}
				}
			}
			for ; x < n; x++ {
				if row[x] >= thr {
					on[x/bs] = true
				}
			}
			continue
		}
		x := 0
		for ; x+8 <= n; x += 8 {
			if binary.LittleEndian.Uint64(row[x:x+8])&hi == 0 {
				continue
			}
			for j := x; j < x+8; j++ {
				if row[j] >= 128 {
					on[j/bs] = true
				}
			}
		}
		for ; x < n; x++ {
			if row[x] >= 128 {
				on[x/bs] = true
			}
		}
	}
	return p
}

// decide finds how many counter-clockwise quarter turns make the page
// upright, from the pooled blocks inside r (block units). Two cues:
// traces run mostly along the time axis (more horizontal than vertical
// ink neighbours), and QRS complexes and the calibration step rise above
// the baseline more than they fall below it in most leads, so within a
// trace row the ink's mean lies above its median when the page is upright
// (common practice: most leads are predominantly upright; aVR and some
// others are not, which the sum over all rows outweighs).
func (p *pooledInk) decide(r image.Rectangle) (int, float64) {
	r = r.Intersect(image.Rect(0, 0, p.w, p.h))
	w, h := r.Dx(), r.Dy()
	if w < 8 || h < 8 {
		return 0, 0
	}
	rows := make([]float64, h)
	cols := make([]float64, w)
	for j := 0; j < h; j++ {
		src := p.on[(j+r.Min.Y)*p.w+r.Min.X : (j+r.Min.Y)*p.w+r.Max.X]
		for i, v := range src {
			if v {
				rows[j]++
				cols[i]++
			}
		}
	}
	// Baselines make a few rows almost fully inked; QRS complexes make
	// columns only partly inked (a fraction of the page height).
	top := func(a []float64, n float64) float64 {
		b := append([]float64(nil), a...)
		sort.Sort(sort.Reverse(sort.Float64Slice(b)))
		k := max(1, len(b)/100)
		var s float64
		for _, v := range b[:k] {
			s += v
		}
		return s / float64(k) / n
	}
	sh, sv := top(rows, float64(w)), top(cols, float64(h))
	if sh+sv == 0 {
		return 0, 0
	}
	axisConf := math.Abs(sh-sv) / (sh + sv)
	if p.trace != nil {
		p.trace("turn: rows %.3f cols %.3f w %d h %d", sh, sv, w, h)
	}
	// Turning is rare: ask for clear evidence before doing it.
	if sv < 1.4*sh {
		r := make([]int, h)
		for j := range r {
			r[j] = int(rows[j])
		}
		sk, bands := riseScore(r, w)
		if p.trace != nil {
			p.trace("turn: rise %.4f over %d bands", sk, bands)
		}
		conf := math.Min(1, 3*axisConf) * math.Min(1, math.Abs(sk)*30)
		if sk <= 0.03 {
			return 0, conf
		}
		if bands < 3 {
			// One or two rows of traces may well be leads drawn mostly
			// below their baseline (V1, aVR): weak evidence for turning
			// a page over.
			conf = math.Min(conf, 0.5)
		}
		return 2, conf
	}
	// Upright candidate for q=1: upright (i', j') is grid pixel (w-1-j', i').
	// (its rows are the grid's columns, right to left).
	ur := make([]int, w)
	for j := range ur {
		ur[j] = int(cols[w-1-j])
	}
	sk, _ := riseScore(ur, h)
	conf := math.Min(1, 3*axisConf) * math.Min(1, math.Abs(sk)*30)
	if sk <= 0 {
		return 1, conf
	}
	return 3, conf
}

// riseScore is Σ (mean − median of ink rows) / band height over the trace
// bands of the upright view, given its count of inked blocks per row and
// its width uw; negative when the ink rises above the baselines. It also
// returns how many bands of some weight it found.
func riseScore(rows []int, uw int) (float64, int) {
	uh := len(rows)
	// Bands: runs of rows separated by at least 2 mm (8 rows) of near-empty rows.
	gapT := max(1, uw/400)
	var score, wsum float64
	var tots []float64
	j := 0
	for j < uh {
		for j < uh && rows[j] <= gapT {
			j++
		}
		start := j
		empty := 0
		for j < uh && empty < 8 {
			if rows[j] <= gapT {
				empty++
			} else {
				empty = 0
			}
			j++
		}
		end := j - empty
		if end-start < 8 {
			continue
		}
		// The rows' counts are the ink's distribution over y: its mean,
		// and its median read off the running count.
		var tot, mean float64
		for y := start; y < end; y++ {
			tot += float64(rows[y])
			mean += float64(y) * float64(rows[y])
		}
		if tot < 20 {
			continue
		}
		mean /= tot
		var med float64
		half, acc := int(tot)/2, 0
		for y := start; y < end; y++ {
			acc += rows[y]
			if acc > half {
				med = float64(y)
				break
			}
		}
		score += (mean - med) / float64(end-start) * tot
		wsum += tot
		tots = append(tots, tot)
	}
	if wsum == 0 {
		return 0, 0
	}
	// Bands that weigh: a title or a lead's label makes a band of its own
	// with little ink.
	big := 0.0
	for _, t := range tots {
		big = math.Max(big, t)
	}
	bands := 0
	for _, t := range tots {
		if t >= 0.3*big {
			bands++
		}
	}
	return score / wsum, bands
}

// turnGray rotates g by q counter-clockwise quarter turns (as displayed).
func turnGray(g *image.Gray, q int) *image.Gray {
	ow, oh, pix, stride := turnPix(g.Pix, g.Stride, g.Rect.Dx(), g.Rect.Dy(), 1, q)
	return &image.Gray{Pix: pix, Stride: stride, Rect: image.Rect(0, 0, ow, oh)}
}

// turnNRGBA is turnGray for colour.
func turnNRGBA(g *image.NRGBA, q int) *image.NRGBA {
	ow, oh, pix, stride := turnPix(g.Pix, g.Stride, g.Rect.Dx(), g.Rect.Dy(), 4, q)
	return &image.NRGBA{Pix: pix, Stride: stride, Rect: image.Rect(0, 0, ow, oh)}
}

// turnPix turns a W×H pixel buffer of bpp bytes per pixel by q quarter
// turns, returning the new size, buffer and stride.
func turnPix(src []byte, sstride, W, H, bpp, q int) (ow, oh int, dst []byte, stride int) {
	ow, oh = W, H
	if q&1 == 1 {
		ow, oh = H, W
	}
	stride = ow * bpp
	dst = make([]byte, stride*oh)
	for y := 0; y < oh; y++ {
		row := dst[y*stride : (y+1)*stride]
		for x := 0; x < ow; x++ {
			sx, sy := turnSrc(q, x, y, W, H)
			if bpp == 1 {
				row[x] = src[sy*sstride+sx]
				continue
			}
			copy(row[x*bpp:(x+1)*bpp], src[sy*sstride+sx*bpp:])
		}
	}
	return ow, oh, dst, stride
}

// turnSrc gives the source pixel of turned pixel (x, y); W, H is the
// source size.
func turnSrc(q, x, y, W, H int) (int, int) {
	switch q & 3 {
	case 1:
		return W - 1 - y, x
	case 2:
		return W - 1 - x, H - 1 - y
	case 3:
		return y, H - 1 - x
	}
	return x, y
}

// turnMat is turnSrc as a matrix (turned px → source px).
func turnMat(q, W, H int) mat3 {
	w, h := float64(W-1), float64(H-1)
	switch q & 3 {
	case 1:
		return mat3{0, -1, w, 1, 0, 0, 0, 0, 1}
	case 2:
		return mat3{-1, 0, w, 0, -1, h, 0, 0, 1}
	case 3:
		return mat3{0, 1, 0, -1, 0, h, 0, 0, 1}
	}
	return ident
}

// inkThreshold is the ink level from which a pixel counts as a trace's for
// the turn and the pulse search: 128 (half strength) when the traces reach
// full strength, else half the traces' own level, taken as the ink level
// that the strongest 0.3 % of the pixels in r reach (a thin pen, blurred
// and lit unevenly in a photo, may never come near full strength), but
// not under 48, where what is left of the grid lies.
func inkThreshold(ink *image.Gray, r image.Rectangle) uint8 {
	r = r.Intersect(ink.Rect)
	var hist [256]int
	n := 0
	for y := r.Min.Y; y < r.Max.Y; y += 4 {
		row := ink.Pix[y*ink.Stride+r.Min.X : y*ink.Stride+r.Max.X]
		for x := 0; x < len(row); x += 2 {
			hist[row[x]]++
			n++
		}
	}
	if n == 0 {
		return 128
	}
	lim, acc := n*3/1000, 0
	lv := 255
	for ; lv > 0; lv-- {
		acc += hist[lv]
		if acc > lim {
			break
		}
	}
	if lv >= 224 {
		return 128 // traces at (nearly) full strength: the usual half way
	}
	return uint8(clampI(lv/2, 48, 128))
}
