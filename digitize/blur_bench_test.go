package digitize

import (
	"image"
	"math"
	"math/rand"
	"runtime"
	"testing"
	"unsafe"

	"gocv.io/x/gocv"
)

// boxBlurSums is the box blur boxBlur replaced, by running sums: the
// reference of the test and the benchmark.
func boxBlurSums(g *gray, r int) *gray {
	w, h := g.w, g.h
	tmp := make([]uint16, w*h)
	n := 2*r + 1
	for y := 0; y < h; y++ {
		row := g.pix[y*w : (y+1)*w]
		o := tmp[y*w : (y+1)*w]
		s := 0
		for k := -r; k <= r; k++ {
			s += int(row[clampI(k, 0, w-1)])
		}
		for x := 0; x < w; x++ {
			o[x] = uint16(s)
			s += int(row[clampI(x+r+1, 0, w-1)]) - int(row[clampI(x-r, 0, w-1)])
		}
	}
	out := &gray{w: w, h: h, pix: make([]uint8, w*h)}
	acc := make([]int, w)
	for k := -r; k <= r; k++ {
		yy := clampI(k, 0, h-1)
		for x := 0; x < w; x++ {
			acc[x] += int(tmp[yy*w+x])
		}
	}
	d := n * n
	for y := 0; y < h; y++ {
		o := out.pix[y*w : (y+1)*w]
		for x := 0; x < w; x++ {
			o[x] = uint8((acc[x] + d/2) / d)
		}
		ya, yb := clampI(y+r+1, 0, h-1), clampI(y-r, 0, h-1)
		ra, rb := tmp[ya*w:(ya+1)*w], tmp[yb*w:(yb+1)*w]
		for x := 0; x < w; x++ {
			acc[x] += int(ra[x]) - int(rb[x])
		}
	}
	return out
}

func blurTestMap(w, h int) *gray {
	rng := rand.New(rand.NewSource(1))
	g := &gray{w: w, h: h, pix: make([]uint8, w*h)}
	for i := range g.pix {
		if rng.Intn(20) == 0 {
			g.pix[i] = uint8(rng.Intn(256))
		}
	}
	return g
}

func TestBoxBlurSameAsSums(t *testing.T) {
	g := blurTestMap(301, 203)
	for r := 1; r <= 3; r++ {
		a, b := boxBlurSums(g, r), boxBlur(g, r)
		n := 0
		for i := range a.pix {
			if a.pix[i] != b.pix[i] {
				n++
			}
		}
		if n > 0 {
			t.Errorf("r=%d: %d of %d pixels differ", r, n, len(a.pix))
		}
	}
}

// BenchmarkBoxBlur: the tracer's blur of a 300-dpi page's ink map
// (3508×2480 px, r = 1 as at 11.8 px/mm).
func BenchmarkBoxBlur(b *testing.B) {
	g := blurTestMap(3508, 2480)
	b.Run("go", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			boxBlurSums(g, 1)
		}
	})
	b.Run("opencv", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			boxBlur(g, 1)
		}
	})
}

// gaussSmoothCV is gaussSmooth by OpenCV (GaussianBlur of the 1×n row,
// ends replicated).
func gaussSmoothCV(v []float64, sigma float64) []float64 {
	r := int(math.Ceil(3 * sigma))
	if r < 1 || len(v) == 0 {
		return append([]float64(nil), v...)
	}
	in := append([]float64(nil), v...)
	src, err := gocv.NewMatFromBytes(1, len(in), gocv.MatTypeCV64F, unsafe.Slice((*byte)(unsafe.Pointer(&in[0])), 8*len(in)))
	if err != nil {
		return in // only for an empty row, excluded above
	}
	defer src.Close()
	dst := gocv.NewMat()
	defer dst.Close()
	gocv.GaussianBlur(src, &dst, image.Pt(2*r+1, 1), sigma, 0, gocv.BorderReplicate)
	runtime.KeepAlive(in)
	out, err := dst.DataPtrFloat64()
	if err != nil || len(out) != len(in) {
		return in
	}
	return append([]float64(nil), out...)
}

func TestGaussSmoothSameAsOpenCV(t *testing.T) {
	rng := rand.New(rand.NewSource(4))
	v := make([]float64, 2480)
	for i := range v {
		v[i] = rng.Float64() * 100
	}
	for _, sigma := range []float64{0.4, 3.9, 11.8} {
		a, b := gaussSmooth(v, sigma), gaussSmoothCV(v, sigma)
		for i := range a {
			if math.Abs(a[i]-b[i]) > 1e-9 {
				t.Fatalf("σ %g, sample %d: %g against OpenCV's %g", sigma, i, a[i], b[i])
			}
		}
	}
}

// BenchmarkGaussSmooth: layout's row profile of a 300-dpi page (2480
// values, σ = 1 mm = 11.8 px).
func BenchmarkGaussSmooth(b *testing.B) {
	rng := rand.New(rand.NewSource(4))
	v := make([]float64, 2480)
	for i := range v {
		v[i] = rng.Float64() * 100
	}
	b.Run("go", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			gaussSmooth(v, 11.8)
		}
	})
	b.Run("opencv", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			gaussSmoothCV(v, 11.8)
		}
	})
}
