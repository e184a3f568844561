package calib

import (
	"math"
	"math/cmplx"
	"sync"
)

// fft is an in-place iterative radix-2 Cooley–Tukey transform; len(a) must
// be a power of two. Sign convention X[k] = Σ x[n]·exp(-2πi·k·n/N).
func fft(a []complex128) {
	n := len(a)
	for i, j := 1, 0; i < n; i++ {
		bit := n >> 1
		for ; j&bit != 0; bit >>= 1 {
			j ^= bit
		}
		j ^= bit
		if i < j {
			a[i], a[j] = a[j], a[i]
		}
	}
	tw := twiddles(n)
	for size := 2; size <= n; size <<= 1 {
		half := size / 2
		stride := n / size
		for start := 0; start < n; start += size {
			lo, hi := a[start:start+half], a[start+half:start+size]
			for k := range lo {
				t := tw[k*stride] * hi[k]
				hi[k] = lo[k] - t
				lo[k] += t
			}
		}
	}
}

var (
	twMu    sync.Mutex
	twCache = map[int][]complex128{}
)

// twiddles returns exp(-2πi·k/n) for k < n/2, made once per n.
func twiddles(n int) []complex128 {
	twMu.Lock()
	defer twMu.Unlock()
	if t, ok := twCache[n]; ok {
		return t
	}
	t := make([]complex128, max(1, n/2))
	for k := range t {
		t[k] = cmplx.Exp(complex(0, -2*math.Pi*float64(k)/float64(n)))
	}
	twCache[n] = t
	return t
}

// hann returns the Hann window of length n.
func hann(n int) []float64 {
	w := make([]float64, n)
	if n == 1 {
		w[0] = 1
		return w
	}
	for i := range w {
		w[i] = 0.5 - 0.5*math.Cos(2*math.Pi*float64(i)/float64(n-1))
	}
	return w
}

// dtft evaluates Σ w[b]·(p[b]-mean)·exp(-2πi·f·(off+b)) by a rotating
// phasor (no trigonometry per sample).
func dtft(p []float32, w []float64, mean float64, off, f float64) complex128 {
	ph := cmplx.Exp(complex(0, -2*math.Pi*f*off))
	step := cmplx.Exp(complex(0, -2*math.Pi*f))
	var re, im float64
	pr, pi := real(ph), imag(ph)
	sr, si := real(step), imag(step)
	for b, v := range p {
		x := (float64(v) - mean) * w[b]
		re += x * pr
		im += x * pi
		pr, pi = pr*sr-pi*si, pr*si+pi*sr
	}
	return complex(re, im)
}

// weightedMean is Σw·p/Σw.
func weightedMean(p []float32, w []float64) float64 {
	var s, sw float64
	for i, v := range p {
		s += float64(v) * w[i]
		sw += w[i]
	}
	if sw == 0 {
		return 0
	}
	return s / sw
}

// powerSpectrum returns |FFT|² of the windowed, mean-removed p padded to
// n (a power of two ≥ len(p)), normalised to unit total AC power. OpenCV's
// DFT is faster (taskset -c 0 go test -bench TileSpectrum -run '^$'
// ./calib/, 200 samples padded to 512: 5.2-5.5 µs against 7.1-7.6 µs
// here) but moves the bench by its last bits (see patchPower).
func powerSpectrum(p []float32, w []float64, n int, buf []complex128) []float64 {
	m := weightedMean(p, w)
	clear(buf)
	for i, v := range p {
		buf[i] = complex((float64(v)-m)*w[i], 0)
	}
	fft(buf)
	out := make([]float64, n/2+1)
	for i := range out {
		out[i] = real(buf[i])*real(buf[i]) + imag(buf[i])*imag(buf[i])
	}
	unitACPower(out)
	return out
}

// unitACPower scales a power spectrum to unit total power over its AC
// bins (all but bin 0) and clears bin 0.
func unitACPower(out []float64) {
	var tot float64
	for _, v := range out[1:] {
		tot += v
	}
	if tot > 0 {
		for i := range out {
			out[i] /= tot
		}
	}
	out[0] = 0
}

// gridAngle estimates the grid's orientation modulo 90° (radians, in
// [-π/4, π/4)) from the 2-D power spectrum of up to three square patches
// of the work image: the grid puts its energy on two perpendicular lines
// through the origin at all its harmonics, while ink spreads broadly. The
// spectrum is whitened by its radial mean and folded into 0.1° bins.
// It returns the angle and the peak's share of the folded energy.
func gridAngle(wk *work, patches int) (float64, float64) {
	a := gridAngles(wk, patches)
	return a[0].theta, a[0].coh
}

// angleEst is one reading of the grid's angle and its coherence.
type angleEst struct{ theta, coh float64 }

// gridAngles is gridAngle read twice from one spectrum: over all periods
// down to 2.3 px, and over periods of 3.5 px and more only. In a photo the
// finest periods carry the camera's own patterns (compression blocks,
// sharpening, resampling moiré) as much as the 1 mm lines; the 5 mm lines
// and their first harmonics lie below them and give the angle alone.
func gridAngles(wk *work, patches int) [2]angleEst {
	n := 512
	for n > 64 && (n > wk.w || n > wk.h) {
		n /= 2
	}
	if n > wk.w || n > wk.h {
		return [2]angleEst{}
	}
	var centres [][2]int
	cy := wk.h/2 - n/2
	// One central patch; two more only on request (weak grid).
	for _, fx := range []float64{0.5, 0.2, 0.8}[:patches] {
		cx := int(fx*float64(wk.w)) - n/2
		cx = clampI(cx, 0, wk.w-n)
		centres = append(centres, [2]int{cx, cy})
		if wk.w < 2*n {
			break
		}
	}
	win := hann(n)
	hn := n/2 + 1 // the spectrum of a real patch is symmetric: columns 0..n/2 hold it all
	pw := make([]float64, n*hn)
	row := make([]complex128, n)
	data := make([]complex128, n*hn)
	for _, c := range centres {
		patchPower(wk, c, n, win, pw, row, data)
	}
	// Radial mean for whitening.
	ap := anglePoints(n)
	rad := make([]float64, ap.rmax+2)
	for _, p := range ap.pts {
		rad[p.r] += pw[p.i]
	}
	for i := range rad {
		if ap.cnt[i] > 0 {
			rad[i] /= ap.cnt[i]
		}
	}
	rmax, pts := ap.rmax, ap.pts
	rLow := int(float64(n) / 3.5)
	var out [2]angleEst
	for band, rm := range []int{rmax, rLow} {
		out[band] = foldAngle(pts, pw, rad, rm)
	}
	return out
}

// patchPower adds the 2-D power spectrum |FFT|² of the n×n patch of the
// work image at c (mean removed, Hann window) to pw, columns 0..n/2
// (n/2+1 a row); row (n) and data (n·(n/2+1)) are scratch. OpenCV's DFT
// is faster (taskset -c 0 go test -bench PatchPower -run '^$' ./calib/,
// a 512×512 patch: 3.2-3.4 ms against 4.2-4.5 ms here, the same spectrum
// to 1e-9), but its last bits move the bench (--cases 100 --seed 1,
// with the tile spectra and digitize's row smoothing on OpenCV too: 6
// pages by more than 0.1 dB, 5 down, one page no longer read) for a
// millisecond or two a page, so the hand-written FFT stays.
func patchPower(wk *work, c [2]int, n int, win, pw []float64, row, data []complex128) {
	hn := n/2 + 1
	var mean float64
	for y := 0; y < n; y++ {
		for _, v := range wk.dmin[(c[1]+y)*wk.w+c[0] : (c[1]+y)*wk.w+c[0]+n] {
			mean += float64(v)
		}
	}
	mean /= float64(n * n)
	// Two real rows in one complex transform (the first as the real
	// part, the second as the imaginary part), parted by symmetry.
	for y := 0; y < n; y += 2 {
		ra := wk.dmin[(c[1]+y)*wk.w+c[0]:]
		rb := wk.dmin[(c[1]+y+1)*wk.w+c[0]:]
		for x := 0; x < n; x++ {
			row[x] = complex((float64(ra[x])-mean)*win[x]*win[y], (float64(rb[x])-mean)*win[x]*win[y+1])
		}
		fft(row)
		da, db := data[y*hn:(y+1)*hn], data[(y+1)*hn:(y+2)*hn]
		for k := 0; k < hn; k++ {
			z, zc := row[k], cmplx.Conj(row[(n-k)%n])
			da[k] = (z + zc) / 2
			db[k] = (z - zc) / complex(0, 2)
		}
	}
	for x := 0; x < hn; x++ {
		for y := 0; y < n; y++ {
			row[y] = data[y*hn+x]
		}
		fft(row)
		for y := 0; y < n; y++ {
			v := row[y]
			pw[y*hn+x] += real(v)*real(v) + imag(v)*imag(v)
		}
	}
}

// foldAngle folds the whitened spectrum points up to radius rm into 0.1°
// bins over 90° and returns the peak's angle and share.
func foldAngle(pts []anglePt, pw, rad []float64, rm int) angleEst {
	const nb = 900 // 0.1° bins over 90°
	var hist [nb]float64
	var tot float64
	for _, p := range pts {
		if rad[p.r] == 0 || p.r > rm {
			continue
		}
		v := pw[p.i] / rad[p.r]
		if v < 4 { // keep only stand-out peaks
			continue
		}
		deg := math.Mod(p.phi*180/math.Pi+360, 90)
		b := int(deg*10) % nb
		hist[b] += v
		tot += v
	}
	if tot == 0 {
		return angleEst{}
	}
	// Smooth over ±0.3° (circularly) and pick the peak.
	var sm [nb]float64
	for b := range sm {
		for d := -3; d <= 3; d++ {
			sm[b] += hist[(b+d+nb)%nb]
		}
	}
	best := 0
	for b := range sm {
		if sm[b] > sm[best] {
			best = b
		}
	}
	off := parabolic(sm[(best-1+nb)%nb], sm[best], sm[(best+1)%nb])
	deg := (float64(best) + 0.5 + off) / 10
	if deg >= 45 {
		deg -= 90
	}
	var near float64
	for d := -10; d <= 10; d++ {
		near += hist[(best+d+nb)%nb]
	}
	return angleEst{deg * math.Pi / 180, near / tot}
}

// anglePts lists the bins of an n×n spectrum that gridAngles reads: the
// upper half plane between the radii rmin and rmax, each with its index in
// the half spectrum (columns 0..n/2; a bin left of the axis is read at its
// mirror image through the origin), its radius and angle.
type anglePts struct {
	pts  []anglePt
	cnt  []float64 // bins per whole radius
	rmax int
}

var (
	anglePtsMu    sync.Mutex
	anglePtsCache = map[int]*anglePts{}
)

func anglePoints(n int) *anglePts {
	anglePtsMu.Lock()
	defer anglePtsMu.Unlock()
	if ap, ok := anglePtsCache[n]; ok {
		return ap
	}
	hn := n/2 + 1
	ap := &anglePts{rmax: int(float64(n) / 2.3)}
	rmin := max(4, n/64)
	ap.cnt = make([]float64, ap.rmax+2)
	for ky := 0; ky < n/2; ky++ {
		for kx := -n/2 + 1; kx < n/2; kx++ {
			if ky == 0 && kx <= 0 {
				continue
			}
			r := math.Hypot(float64(kx), float64(ky))
			ri := int(r + 0.5)
			if ri < rmin || ri > ap.rmax {
				continue
			}
			i := ky*hn + kx
			if kx < 0 {
				i = ((n-ky)%n)*hn - kx
			}
			ap.cnt[ri]++
			ap.pts = append(ap.pts, anglePt{i, ri, math.Atan2(float64(ky), float64(kx))})
		}
	}
	anglePtsCache[n] = ap
	return ap
}

// anglePt is one bin of the 2-D spectrum: its index, radius and angle.
type anglePt struct {
	i   int
	r   int
	phi float64
}
