package calib

import (
	"math"
	"math/cmplx"
	"math/rand"
	"runtime"
	"testing"
	"unsafe"

	"gocv.io/x/gocv"
)

// powerSpectrumCV is powerSpectrum by OpenCV's DFT.
func powerSpectrumCV(p []float32, w []float64, n int, vals []float64) []float64 {
	m := weightedMean(p, w)
	clear(vals)
	for i, v := range p {
		vals[i] = (float64(v) - m) * w[i]
	}
	out := make([]float64, n/2+1)
	if !dftPower(vals, 1, n, out, n/2+1) {
		return out
	}
	unitACPower(out)
	return out
}

// dftPower (for the tests and benchmarks) adds |DFT|² of the rows×cols real plane vals (row-major,
// CV_64F) to pw, columns 0..hn−1 of each row (hn a row in pw): OpenCV's
// forward DFT, 2-D when rows > 1. ok is false if OpenCV could not take
// the plane.
func dftPower(vals []float64, rows, cols int, pw []float64, hn int) bool {
	if len(vals) != rows*cols || rows*cols == 0 {
		return false
	}
	src, err := gocv.NewMatFromBytes(rows, cols, gocv.MatTypeCV64F, unsafe.Slice((*byte)(unsafe.Pointer(&vals[0])), 8*len(vals)))
	if err != nil {
		return false
	}
	defer src.Close()
	dst := gocv.NewMat()
	defer dst.Close()
	gocv.DFT(src, &dst, gocv.DftComplexOutput)
	runtime.KeepAlive(vals)
	z, err := dst.DataPtrFloat64()
	if err != nil || len(z) != 2*rows*cols {
		return false
	}
	for y := 0; y < rows; y++ {
		for x := 0; x < hn; x++ {
			re, im := z[2*(y*cols+x)], z[2*(y*cols+x)+1]
			pw[y*hn+x] += re*re + im*im
		}
	}
	return true
}

// patchPowerCV is patchPower by OpenCV's 2-D DFT; vals (n·n) is scratch.
func patchPowerCV(wk *work, c [2]int, n int, win, pw, vals []float64) {
	var mean float64
	for y := 0; y < n; y++ {
		for _, v := range wk.dmin[(c[1]+y)*wk.w+c[0] : (c[1]+y)*wk.w+c[0]+n] {
			mean += float64(v)
		}
	}
	mean /= float64(n * n)
	for y := 0; y < n; y++ {
		r := wk.dmin[(c[1]+y)*wk.w+c[0]:]
		for x := 0; x < n; x++ {
			vals[y*n+x] = (float64(r[x]) - mean) * win[x] * win[y]
		}
	}
	dftPower(vals, n, n, pw, n/2+1)
}

// calib's FFT against the DFT's definition X[k] = Σ x[n]·exp(−2πikn/N)
// (summed directly).
func TestFFTDefinition(t *testing.T) {
	rng := rand.New(rand.NewSource(7))
	n := 64
	x := make([]complex128, n)
	for i := range x {
		x[i] = complex(rng.Float64(), rng.Float64())
	}
	y := append([]complex128(nil), x...)
	fft(y)
	for k := 0; k < n; k++ {
		var s complex128
		for j := 0; j < n; j++ {
			s += x[j] * cmplx.Exp(complex(0, -2*math.Pi*float64(k*j)/float64(n)))
		}
		if cmplx.Abs(s-y[k]) > 1e-9 {
			t.Fatalf("bin %d: %v, want %v", k, y[k], s)
		}
	}
}

func spectrumWork(n int) *work {
	rng := rand.New(rand.NewSource(2))
	wk := &work{w: n, h: n, dmin: make([]float32, n*n)}
	for y := 0; y < n; y++ {
		for x := 0; x < n; x++ {
			// A grid of 8-px lines turned by 2°, and noise.
			u := float64(x)*math.Cos(0.035) + float64(y)*math.Sin(0.035)
			v := -float64(x)*math.Sin(0.035) + float64(y)*math.Cos(0.035)
			g := 0.0
			if math.Mod(u+800, 8) < 1 || math.Mod(v+800, 8) < 1 {
				g = 60
			}
			wk.dmin[y*n+x] = float32(g + 20*rng.Float64())
		}
	}
	return wk
}

// OpenCV's spectra against calib's (checked above on the definition).
func TestSpectraSameAsOpenCV(t *testing.T) {
	n := 128
	wk := spectrumWork(n)
	win := hann(n)
	hn := n/2 + 1
	a, b := make([]float64, n*hn), make([]float64, n*hn)
	patchPower(wk, [2]int{0, 0}, n, win, a, make([]complex128, n), make([]complex128, n*hn))
	patchPowerCV(wk, [2]int{0, 0}, n, win, b, make([]float64, n*n))
	var top float64
	for _, v := range a {
		top = math.Max(top, v)
	}
	for i := range a {
		if math.Abs(a[i]-b[i]) > 1e-9*top {
			t.Fatalf("2-D bin %d: %g against OpenCV's %g", i, a[i], b[i])
		}
	}
	p := wk.dmin[:200]
	w := hann(len(p))
	pa := powerSpectrum(p, w, tileFFT, make([]complex128, tileFFT))
	pb := powerSpectrumCV(p, w, tileFFT, make([]float64, tileFFT))
	for i := range pa {
		if math.Abs(pa[i]-pb[i]) > 1e-9 {
			t.Fatalf("1-D bin %d: %g against OpenCV's %g", i, pa[i], pb[i])
		}
	}
}

// BenchmarkPatchPower: one 512×512 patch's 2-D power spectrum, as
// gridAngles reads it, by calib's FFT and by OpenCV's DFT.
func BenchmarkPatchPower(b *testing.B) {
	n := 512
	wk := spectrumWork(n)
	win := hann(n)
	hn := n/2 + 1
	pw := make([]float64, n*hn)
	row, data := make([]complex128, n), make([]complex128, n*hn)
	vals := make([]float64, n*n)
	b.Run("go", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			patchPower(wk, [2]int{0, 0}, n, win, pw, row, data)
		}
	})
	b.Run("opencv", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			patchPowerCV(wk, [2]int{0, 0}, n, win, pw, vals)
		}
	})
}

// BenchmarkTileSpectrum: one tile profile's power spectrum (gridPeriod's
// analyzeAxis: 200 samples padded to tileFFT = 512), by fftRadix2 and by
// OpenCV's DFT.
func BenchmarkTileSpectrum(b *testing.B) {
	rng := rand.New(rand.NewSource(6))
	p := make([]float32, 200)
	for i := range p {
		p[i] = float32(50*math.Sin(float64(i)*0.8) + 10*rng.Float64())
	}
	w := hann(len(p))
	buf := make([]complex128, tileFFT)
	vals := make([]float64, tileFFT)
	b.Run("go", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			powerSpectrum(p, w, tileFFT, buf)
		}
	})
	b.Run("opencv", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			powerSpectrumCV(p, w, tileFFT, vals)
		}
	})
}
