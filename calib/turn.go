package calib

import (
	"math"
	"sort"
)

// decideTurn finds how many counter-clockwise quarter turns make the page
// upright. Two cues on a coarse ink map (4 px/mm): traces run mostly along
// the time axis (more horizontal than vertical ink neighbours), and QRS
// complexes and the calibration step rise above the baseline more than
// they fall below it in most leads, so within a trace row the ink's mean
// lies above its median when the page is upright (common practice: most
// leads are predominantly upright; aVR and some others are not, which the
// sum over all rows outweighs).
func decideTurn(wk *work, H mat3, X0, X1, Y0, Y1 float64) (int, float64) {
	const r = 4.0
	w, h := int((X1-X0)*r), int((Y1-Y0)*r)
	if w < 8 || h < 8 || int64(w)*int64(h) > 20e6 {
		return 0, 0
	}
	vals := make([]uint8, w*h)
	for j := 0; j < h; j++ {
		Y := Y0 + (float64(j)+0.5)/r
		for i := 0; i < w; i++ {
			X := X0 + (float64(i)+0.5)/r
			x, y := H.apply(X, Y)
			xi, yi := int(x+0.5), int(y+0.5)
			if xi < 0 || yi < 0 || xi >= wk.w || yi >= wk.h {
				continue
			}
			vals[j*w+i] = uint8(max(0, min(255, wk.dmax[yi*wk.w+xi])))
		}
	}
	// Ink threshold: well above the grid (grey grids stay in dmax).
	var hist [256]int
	for _, v := range vals {
		hist[v]++
	}
	p := 255
	for acc := 0; p > 0; p-- {
		acc += hist[p]
		if acc > len(vals)/200 {
			break
		}
	}
	t := uint8(max(60, int(0.6*float64(p))))
	on := make([]bool, w*h)
	var hAdj, vAdj float64
	for j := 0; j < h; j++ {
		for i := 0; i < w; i++ {
			on[j*w+i] = vals[j*w+i] >= t
		}
	}
	for j := 0; j < h-1; j++ {
		for i := 0; i < w-1; i++ {
			if !on[j*w+i] {
				continue
			}
			if on[j*w+i+1] {
				hAdj++
			}
			if on[(j+1)*w+i] {
				vAdj++
			}
		}
	}
	if hAdj+vAdj == 0 {
		return 0, 0
	}
	axisConf := math.Abs(hAdj-vAdj) / (hAdj + vAdj)
	if hAdj >= vAdj {
		sk := riseScore(on, w, h, func(i, j int) int { return j*w + i }, w, h)
		conf := math.Min(1, 3*axisConf) * math.Min(1, math.Abs(sk)*10)
		if sk <= 0 {
			return 0, conf
		}
		return 2, conf
	}
	// Upright candidate for q=1: upright (i', j') is grid pixel (w-1-j', i').
	sk := riseScore(on, w, h, func(i, j int) int { return i*w + (w - 1 - j) }, h, w)
	conf := math.Min(1, 3*axisConf) * math.Min(1, math.Abs(sk)*10)
	if sk <= 0 {
		return 1, conf
	}
	return 3, conf
}

// riseScore is Σ (mean − median of ink rows) / band height over the trace
// bands of the upright view (index maps upright (i, j) to on[]); negative
// when the ink rises above the baselines.
func riseScore(on []bool, _, _ int, idx func(i, j int) int, uw, uh int) float64 {
	rows := make([]int, uh)
	for j := 0; j < uh; j++ {
		for i := 0; i < uw; i++ {
			if on[idx(i, j)] {
				rows[j]++
			}
		}
	}
	// Bands: runs of rows separated by at least 2 mm (8 rows) of near-empty rows.
	gapT := max(1, uw/400)
	var score, wsum float64
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
		var ys []float64
		var tot float64
		for y := start; y < end; y++ {
			for c := 0; c < rows[y]; c++ {
				ys = append(ys, float64(y))
			}
			tot += float64(rows[y])
		}
		if len(ys) < 20 {
			continue
		}
		sort.Float64s(ys)
		med := ys[len(ys)/2]
		var mean float64
		for _, y := range ys {
			mean += y
		}
		mean /= float64(len(ys))
		score += (mean - med) / float64(end-start) * tot
		wsum += tot
	}
	if wsum == 0 {
		return 0
	}
	return score / wsum
}
