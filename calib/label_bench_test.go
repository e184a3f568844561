package calib

import (
	"math/rand"
	"testing"
)

// labelStrokesUnionFind is the union-find labelling labelStrokes replaced
// (8-connected), the reference of the test and the benchmark.
func labelStrokesUnionFind(ink []bool, w, h int) []int32 {
	lab := make([]int32, w*h)
	parent := []int32{0}
	find := func(i int32) int32 {
		for parent[i] != i {
			parent[i] = parent[parent[i]]
			i = parent[i]
		}
		return i
	}
	union := func(a, b int32) {
		a, b = find(a), find(b)
		if a != b {
			if a < b {
				parent[b] = a
			} else {
				parent[a] = b
			}
		}
	}
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			i := y*w + x
			if !ink[i] {
				continue
			}
			var l int32
			try := func(j int) {
				if lj := lab[j]; lj != 0 {
					if l == 0 {
						l = lj
					} else if lj != l {
						union(l, lj)
					}
				}
			}
			if x > 0 {
				try(i - 1)
			}
			if y > 0 {
				if x > 0 {
					try(i - w - 1)
				}
				try(i - w)
				if x < w-1 {
					try(i - w + 1)
				}
			}
			if l == 0 {
				l = int32(len(parent))
				parent = append(parent, l)
			}
			lab[i] = l
		}
	}
	for i, l := range lab {
		if l != 0 {
			lab[i] = find(l)
		}
	}
	return lab
}

func labelTestInk(w, h int) []bool {
	rng := rand.New(rand.NewSource(3))
	ink := make([]bool, w*h)
	// Wavy strokes and speckle, as a screened page's ink map has.
	for s := 0; s < 40; s++ {
		y := rng.Intn(h)
		for x := 0; x < w; x++ {
			y = min(max(y+rng.Intn(3)-1, 0), h-1)
			ink[y*w+x] = true
		}
	}
	for i := range ink {
		if rng.Intn(50) == 0 {
			ink[i] = true
		}
	}
	return ink
}

// The same pieces: a one-to-one map between the two labellings.
func TestLabelStrokesSameAsUnionFind(t *testing.T) {
	w, h := 300, 200
	ink := labelTestInk(w, h)
	a, b := labelStrokesUnionFind(ink, w, h), labelStrokes(ink, w, h)
	ab, ba := map[int32]int32{}, map[int32]int32{}
	for i := range a {
		if (a[i] == 0) != (b[i] == 0) {
			t.Fatalf("pixel %d: ink in one labelling only", i)
		}
		if a[i] == 0 {
			continue
		}
		if x, ok := ab[a[i]]; ok && x != b[i] {
			t.Fatalf("piece %d split by OpenCV", a[i])
		}
		if x, ok := ba[b[i]]; ok && x != a[i] {
			t.Fatalf("piece %d split by the union-find", b[i])
		}
		ab[a[i]], ba[b[i]] = b[i], a[i]
	}
}

// BenchmarkLabelStrokes: a screen-sized ink map (1240×877 px, the work
// image of an A4 page at 150 dpi).
func BenchmarkLabelStrokes(b *testing.B) {
	w, h := 1240, 877
	ink := labelTestInk(w, h)
	b.Run("go", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			labelStrokesUnionFind(ink, w, h)
		}
	})
	b.Run("opencv", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			labelStrokes(ink, w, h)
		}
	})
}

// maxFilterLoops is the running maximum maxFilter replaced, in two
// one-dimensional passes: the reference of the test and the benchmark.
func maxFilterLoops(p []uint8, w, h, r int) []uint8 {
	tmp := make([]uint8, len(p))
	out := make([]uint8, len(p))
	for y := 0; y < h; y++ {
		row, dst := p[y*w:(y+1)*w], tmp[y*w:(y+1)*w]
		for x := range dst {
			m := uint8(0)
			for k := max(0, x-r); k <= min(w-1, x+r); k++ {
				m = max(m, row[k])
			}
			dst[x] = m
		}
	}
	for y := 0; y < h; y++ {
		dst := out[y*w : (y+1)*w]
		for x := range dst {
			m := uint8(0)
			for k := max(0, y-r); k <= min(h-1, y+r); k++ {
				m = max(m, tmp[k*w+x])
			}
			dst[x] = m
		}
	}
	return out
}

func TestMaxFilterSameAsLoops(t *testing.T) {
	w, h := 301, 203
	rng := rand.New(rand.NewSource(5))
	p := make([]uint8, w*h)
	for i := range p {
		p[i] = uint8(rng.Intn(256))
	}
	a, b := maxFilterLoops(p, w, h, sheetClose), maxFilter(p, w, h, sheetClose)
	for i := range a {
		if a[i] != b[i] {
			t.Fatalf("pixel %d: %d against OpenCV's %d", i, a[i], b[i])
		}
	}
}

// BenchmarkMaxFilter: sheetQuad's running maximum (r = sheetClose) over
// a work image of 1240×877 px.
func BenchmarkMaxFilter(b *testing.B) {
	w, h := 1240, 877
	rng := rand.New(rand.NewSource(5))
	p := make([]uint8, w*h)
	for i := range p {
		p[i] = uint8(rng.Intn(256))
	}
	b.Run("go", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			maxFilterLoops(p, w, h, sheetClose)
		}
	})
	b.Run("opencv", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			maxFilter(p, w, h, sheetClose)
		}
	})
}
