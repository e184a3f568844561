package calib

import "math"

// axisFit is the line period found along one axis of the frame.
type axisFit struct {
	F     float64 // fundamental frequency, cycles per work px
	m     int     // the strongest peak was harmonic m of F
	prom  float64 // prominence of the strongest peak over its surroundings
	harm  []int   // harmonics of F that stand out
	ok    bool
	unit  float64 // mm per fundamental period (1 or 5), set later
	oneMM bool    // F is known to be the 1 mm lines (they were seen under a 5 mm period)
}

const tileFFT = 512

// fullTile says whether a tile is mostly inside the image.
func (g *gridScan) fullTile(t *tileProj) bool {
	return t.n > 0.6*float64(g.ts*g.ts)
}

// analyzeAxis sums the normalised tile power spectra along one axis and
// finds the grid's fundamental line frequency.
func analyzeAxis(g *gridScan, useU bool) axisFit {
	w := hann(g.ts + 2)
	buf := make([]complex128, tileFFT)
	sum := make([]float64, tileFFT/2+1)
	nt := 0
	for i := range g.tiles {
		t := &g.tiles[i]
		if !g.fullTile(t) {
			continue
		}
		p := t.pv
		if useU {
			p = t.pu
		}
		ps := powerSpectrum(p, w, tileFFT, buf)
		for j := range sum {
			sum[j] += ps[j]
		}
		nt++
	}
	if nt < 2 {
		return axisFit{}
	}
	n := float64(tileFFT)
	jmin := int(n * 3 / float64(g.ts)) // at least 3 periods per tile
	jmax := int(n / 2.3)               // lines at least 2.3 px apart
	// Prominence: the bin over the median of a wide window around it
	// (excluding the peak's own lobe; the median ignores other harmonics).
	win := make([]float64, 0, 256)
	prom := func(j int) float64 {
		lo, hi := int(float64(j)/1.6), int(float64(j)*1.6)+1
		ex := max(4, j/10)
		win = win[:0]
		for i := max(1, lo); i <= hi && i < len(sum); i++ {
			if i >= j-ex && i <= j+ex {
				continue
			}
			win = append(win, sum[i])
		}
		if len(win) < 4 {
			return 0
		}
		m := median(win)
		if m <= 0 {
			return 0
		}
		return sum[j] / m
	}
	best, bestP := -1, 0.0
	for j := max(jmin, 2); j <= jmax && j < len(sum)-1; j++ {
		if sum[j] < sum[j-1] || sum[j] < sum[j+1] {
			continue
		}
		r := prom(j)
		if r < 6 {
			continue
		}
		if best < 0 || sum[j] > sum[best] {
			best, bestP = j, r
		}
	}
	if best < 0 {
		return axisFit{}
	}
	fp := (float64(best) + parabolic(sum[best-1], sum[best], sum[best+1])) / n
	at := func(f float64) float64 { // best prominence near frequency f
		j := int(math.Round(f * n))
		r := 0.0
		for i := j - 2; i <= j+2; i++ {
			if i >= 2 && i < len(sum)-1 {
				r = max(r, prom(i))
			}
		}
		return r
	}
	if g.trace != nil {
		var ps []float64
		for i := 1; i < 5; i++ {
			ps = append(ps, at(fp*float64(i)/5))
		}
		g.trace("peak f %.4f prom %.1f; fifths %.1f", fp, bestP, ps)
	}
	m := 1
	// ECG paper repeats every 5 mm (heavier lines or dots every fifth,
	// common practice): the strongest peak is the 1 mm lines when at least
	// three of the four fifths of its frequency stand out too.
	if fp/5*n >= 2.5 {
		cnt := 0
		for i := 1; i < 5; i++ {
			if at(fp*float64(i)/5) >= 2.5 {
				cnt++
			}
		}
		if cnt >= 3 {
			m = 5
		}
	}
	af := axisFit{F: fp / float64(m), m: m, prom: bestP, ok: true}
	for h := 1; float64(h)*af.F < 0.45 && h <= 15; h++ {
		if at(af.F*float64(h)) >= 4 {
			af.harm = append(af.harm, h)
		}
	}
	if m == 5 {
		// The 5 mm period is only worth unwrapping on when its own low
		// harmonics are clear; otherwise measure on the 1 mm lines.
		low := 0
		for _, h := range af.harm {
			if h < 5 {
				low++
			}
		}
		if low < 2 {
			af = axisFit{F: fp, m: 1, prom: bestP, ok: true}
			for h := 1; float64(h)*af.F < 0.45 && h <= 15; h++ {
				if at(af.F*float64(h)) >= 4 {
					af.harm = append(af.harm, h)
				}
			}
		}
	}
	if len(af.harm) == 0 {
		af.harm = []int{1}
	}
	return af
}

// parabolic returns the sub-bin offset of a peak from three samples.
func parabolic(a, b, c float64) float64 {
	d := a - 2*b + c
	if d == 0 {
		return 0
	}
	o := 0.5 * (a - c) / d
	return math.Max(-0.5, math.Min(0.5, o))
}
