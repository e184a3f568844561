package calib

import (
	"fmt"
	"math"
	"runtime"
	"sort"
	"unsafe"

	"gocv.io/x/gocv"
	"gonum.org/v1/gonum/stat"
)

// Screening is a quick look at one page of a document: does it hold an
// ECG (a millimetre grid, or long wavy strokes as traces are), or is it a
// page of something else (a cover sheet of text and form lines)?
type Screening struct {
	ECG bool `json:"ecg"`
	// Grid is set when a fine grid repeats along both axes at the same
	// spacing (or at one and five times it).
	Grid bool `json:"grid"`
	// GridPeriodPx gives the spacings found across and down, in the
	// page's pixels (0 when none).
	GridPeriodPx [2]float64 `json:"grid_period_px,omitempty"`
	// TraceWidth is the summed width of the trace-like strokes as a
	// fraction of the page's long side.
	TraceWidth float64 `json:"trace_width"`
	// Why says what was seen, in words.
	Why string `json:"why"`
}

// Screen thresholds. The page is taken to be a whole sheet (A4 or Letter,
// about 280 mm on its long side) to size its millimetres; the bounds are
// wide enough for a sheet that fills half the picture.
const (
	screenLong        = 1000  // work px on the long side
	sheetLongMM       = 280.0 // A4 297 mm, Letter 279 mm
	strokeMinWidth    = 0.08  // of the long side: 22 mm, a third of a 3x4 panel
	strokeMinHeightMM = 2.5   // smallest deflection span counted
	traceWidthNeeded  = 0.35  // of the long side: more than one signature or heading
	gridPeakNeeded    = 0.2   // normalised autocorrelation at the grid's spacing
	gridMinMM         = 0.7   // spacings looked for, from the 1 mm to the 5 mm lines
	gridMaxMM         = 6.5
)

// Screen looks at a page at reduced resolution (about 1000 px on its long
// side; a few tens of milliseconds) and tells whether it holds an ECG.
// It is a screen, not a reading: it says yes to anything with a grid or
// trace-like strokes, and no to pages of text, rules and boxes.
func Screen(pg *Page) Screening { return screen(pg, nil) }

// screen is Screen telling trace (when set) what it measured.
func screen(pg *Page, trace func(format string, a ...any)) Screening {
	if pg == nil || pg.Image == nil {
		return Screening{Why: "no picture"}
	}
	b := pg.Image.Bounds()
	if b.Dx() < 32 || b.Dy() < 32 {
		return Screening{Why: fmt.Sprintf("%d×%d pixels, too small to hold an ECG", b.Dx(), b.Dy())}
	}
	k := max(1, int(math.Round(float64(max(b.Dx(), b.Dy()))/screenLong)))
	wk := makeWork(pg.Image, k)
	wk.trace = trace
	long := float64(max(wk.w, wk.h))
	mm := long / sheetLongMM
	var s Screening
	// Traces across the page, or down it (a page turned a quarter).
	ink := screenInk(wk)
	// Rules a quarter of the sheet long are dropped first; across the
	// traces' direction a rule may have gaps of up to 2 mm (the traces of
	// rows below one another are 10 mm or more apart), along it 3 px.
	ruleLen := int(math.Min(0.25*long, 0.6*float64(min(wk.w, wk.h))))
	gap := max(3, int(2*mm))
	t := transpose(ink, wk.w, wk.h)
	dropRules(ink, wk.w, wk.h, ruleLen, 3, gap)
	across := traceWidth(ink, wk.w, wk.h, mm, long)
	dropRules(t, wk.h, wk.w, ruleLen, 3, gap)
	down := traceWidth(t, wk.h, wk.w, mm, long)
	s.TraceWidth = math.Max(across, down)
	px, py := gridPeriod(wk.dmin, wk.w, wk.h, mm)
	if wk.trace != nil {
		wk.trace("screen: periods %.2f × %.2f work px (k %d), trace width %.2f", px, py, k, s.TraceWidth)
	}
	if px > 0 && py > 0 {
		r := px / py
		if r < 1 {
			r = 1 / r
		}
		if r < 1.18 || (r > 4.2 && r < 5.8) {
			s.Grid = true
			s.GridPeriodPx = [2]float64{px * float64(k), py * float64(k)}
		}
	}
	s.ECG = s.Grid || s.TraceWidth >= traceWidthNeeded
	switch {
	case s.Grid && s.TraceWidth >= traceWidthNeeded:
		s.Why = "a grid and trace-like strokes"
	case s.Grid:
		s.Why = "a grid repeating across and down at one spacing"
	case s.ECG:
		s.Why = fmt.Sprintf("trace-like strokes across %.0f %% of the page", 100*s.TraceWidth)
	case s.TraceWidth > 0:
		s.Why = fmt.Sprintf("no grid, and wavy strokes across only %.0f %% of the page (text, rules or a signature)", 100*s.TraceWidth)
	default:
		s.Why = "no grid and no trace-like stroke (a page of text, rules or boxes)"
	}
	return s
}

// screenInk marks dark strokes: darker (by the brightest channel, so a
// red or green grid stays out) than the paper around them, the paper
// taken tile by tile so uneven light does not count as ink.
func screenInk(wk *work) []bool {
	w, h := wk.w, wk.h
	const ts = 48
	tw, th := (w+ts-1)/ts, (h+ts-1)/ts
	bg := make([]float32, tw*th)
	buf := make([]float32, 0, ts*ts)
	for ty := 0; ty < th; ty++ {
		for tx := 0; tx < tw; tx++ {
			buf = buf[:0]
			for y := ty * ts; y < min(h, (ty+1)*ts); y += 2 {
				for x := tx * ts; x < min(w, (tx+1)*ts); x += 2 {
					buf = append(buf, wk.dmax[y*w+x])
				}
			}
			sort.Slice(buf, func(a, b int) bool { return buf[a] < buf[b] })
			if len(buf) > 0 {
				bg[ty*tw+tx] = buf[len(buf)*2/5]
			}
		}
	}
	// The contrast of the darkest strokes against the paper sets the cut.
	var hist [256]int
	for i := 0; i < len(wk.dmax); i += 3 {
		hist[clampI(int(wk.dmax[i]-bg[(i/w/ts)*tw+(i%w)/ts]), 0, 255)]++
	}
	n := 0
	for _, c := range hist {
		n += c
	}
	top, acc := 255, 0
	for v := 255; v >= 0; v-- {
		acc += hist[v]
		if acc > n/500 {
			top = v
			break
		}
	}
	// A third of it: a 1 px trace of a fax averaged into a work pixel
	// keeps a quarter to a half of its darkness.
	cut := float32(max(30, top/3))
	ink := make([]bool, w*h)
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			ink[y*w+x] = wk.dmax[y*w+x]-bg[(y/ts)*tw+x/ts] > cut
		}
	}
	// Single-pixel gaps (a fax's broken strokes) are bridged where ink
	// lies on both sides.
	out := make([]bool, w*h)
	copy(out, ink)
	for y := 1; y < h-1; y++ {
		for x := 1; x < w-1; x++ {
			i := y*w + x
			if !ink[i] && ((ink[i-1] && ink[i+1]) || (ink[i-w] && ink[i+w]) || (ink[i-w-1] && ink[i+w+1]) || (ink[i-w+1] && ink[i+w-1])) {
				out[i] = true
			}
		}
	}
	return out
}

// dropRules clears runs of ink longer than n along a row or a column:
// grid lines a fax kept and the rules of a form, which would join the
// traces of every row into one stroke (no trace runs so far straight).
func dropRules(ink []bool, w, h, n, gapH, gapV int) {
	// A run may skip gaps of up to gap px and lean by a pixel (a line a
	// little turned, or broken up by a fax's thresholding): it is followed
	// on two neighbouring columns (rows) at once.
	var clearH, clearV [][3]int
	runs := func(length, gap int, at func(i int) bool, found func(a, b int)) {
		start, last := -1, -10
		for i := 0; i <= length; i++ {
			if i < length && at(i) {
				if start < 0 || i-last > gap {
					if start >= 0 && last-start+1 >= n {
						found(start, last+1)
					}
					start = i
				}
				last = i
			}
		}
		if start >= 0 && last-start+1 >= n {
			found(start, last+1)
		}
	}
	for y := 0; y+1 < h; y += 1 {
		runs(w, gapH, func(x int) bool { return ink[y*w+x] || ink[(y+1)*w+x] }, func(a, b int) {
			clearH = append(clearH, [3]int{y, a, b}, [3]int{y + 1, a, b})
		})
	}
	for x := 0; x+1 < w; x++ {
		runs(h, gapV, func(y int) bool { return ink[y*w+x] || ink[y*w+x+1] }, func(a, b int) {
			clearV = append(clearV, [3]int{x, a, b}, [3]int{x + 1, a, b})
		})
	}
	// A trace crossing a rule keeps its pixels there: a rule pixel with
	// ink beside it on both sides across the rule (within 3 px) stays.
	rule := make([]bool, len(ink))
	for _, r := range clearH {
		for x := r[1]; x < r[2]; x++ {
			rule[r[0]*w+x] = true
		}
	}
	for _, r := range clearV {
		for y := r[1]; y < r[2]; y++ {
			rule[y*w+r[0]] = true
		}
	}
	keep := func(x, y, dx, dy int) bool {
		side := func(s int) bool {
			for d := 1; d <= 3; d++ {
				xx, yy := x+s*d*dx, y+s*d*dy
				if xx < 0 || yy < 0 || xx >= w || yy >= h {
					return false
				}
				if i := yy*w + xx; ink[i] && !rule[i] {
					return true
				}
			}
			return false
		}
		return side(-1) && side(1)
	}
	var restore []int
	for _, r := range clearH {
		for x := r[1]; x < r[2]; x++ {
			if keep(x, r[0], 0, 1) {
				restore = append(restore, r[0]*w+x)
			}
		}
	}
	for _, r := range clearV {
		for y := r[1]; y < r[2]; y++ {
			if keep(r[0], y, 1, 0) {
				restore = append(restore, y*w+r[0])
			}
		}
	}
	for i, r := range rule {
		if r {
			ink[i] = false
		}
	}
	for _, i := range restore {
		ink[i] = true
	}
}

func transpose(a []bool, w, h int) []bool {
	out := make([]bool, len(a))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			out[x*h+y] = a[y*w+x]
		}
	}
	return out
}

// labelStrokes labels the 8-connected pieces of ink: one label > 0 per
// piece, 0 off the ink (OpenCV's connected components). On one core
// (taskset -c 0 go test -bench LabelStrokes -run '^$' ./calib/, 1240×877
// px of strokes and speckle) it takes 4.0 ms with the conversion of the
// mask, where a union-find written out by hand (labelStrokesUnionFind in
// the tests, the same pieces) took 4.1-4.4 ms.
func labelStrokes(ink []bool, w, h int) []int32 {
	out := make([]int32, w*h)
	if len(out) == 0 || len(ink) != len(out) {
		return out
	}
	px := make([]byte, len(ink))
	for i, v := range ink {
		if v {
			px[i] = 1
		}
	}
	src, err := gocv.NewMatFromBytes(h, w, gocv.MatTypeCV8UC1, px)
	if err != nil {
		return out // only for an empty mask, excluded above
	}
	defer src.Close()
	ob := unsafe.Slice((*byte)(unsafe.Pointer(&out[0])), 4*len(out))
	lab, err := gocv.NewMatFromBytes(h, w, gocv.MatTypeCV32S, ob)
	if err != nil {
		return out
	}
	defer lab.Close()
	gocv.ConnectedComponentsWithParams(src, &lab, 8, gocv.MatTypeCV32S, gocv.CCL_DEFAULT)
	if v, err := lab.DataPtrUint8(); err == nil && len(v) == len(ob) && &v[0] != &ob[0] {
		copy(ob, v) // OpenCV chose its own buffer after all
	}
	runtime.KeepAlive(px)
	runtime.KeepAlive(out)
	return out
}

// traceWidth labels the strokes of ink (8-connected) and sums the widths
// of those shaped as traces are: wide, spanning several millimetres up
// and down, yet thin in most columns (a curve, not a word, a box or a
// block), present in nearly every column of their span, and not a
// straight line. The sum is returned as a fraction of long.
func traceWidth(ink []bool, w, h int, mm, long float64) float64 {
	lab := labelStrokes(ink, w, h)
	type box struct{ x0, y0, x1, y1 int }
	boxes := map[int32]*box{}
	for i, r := range lab {
		if r == 0 {
			continue
		}
		x, y := i%w, i/w
		bx := boxes[r]
		if bx == nil {
			boxes[r] = &box{x, y, x, y}
			continue
		}
		bx.x0, bx.x1 = min(bx.x0, x), max(bx.x1, x)
		bx.y0, bx.y1 = min(bx.y0, y), max(bx.y1, y)
	}
	minW, minH := strokeMinWidth*long, strokeMinHeightMM*mm
	total := 0.0
	for r, bx := range boxes {
		bw, bh := bx.x1-bx.x0+1, bx.y1-bx.y0+1
		if float64(bw) < minW || float64(bh) < minH {
			continue
		}
		// Per column: the extent of the stroke, and the length of its
		// runs (rows of traces joined by what is left of a grid line are
		// one stroke, many runs per column, each as thin as a trace).
		lo := make([]int, bw)
		hi := make([]int, bw)
		last := make([]int, bw)
		for i := range lo {
			lo[i], hi[i], last[i] = -1, -1, -2
		}
		var runLens []float64
		runStart := make([]int, bw)
		for y := bx.y0; y <= bx.y1+1; y++ {
			for x := bx.x0; x <= bx.x1; x++ {
				c := x - bx.x0
				on := y <= bx.y1 && lab[y*w+x] == r
				if on {
					if lo[c] < 0 {
						lo[c] = y
					}
					hi[c] = y
					if last[c] != y-1 {
						runStart[c] = y
					}
					last[c] = y
				} else if last[c] == y-1 {
					runLens = append(runLens, float64(y-runStart[c]))
				}
			}
		}
		var cx, cy []float64
		for c := range lo {
			if lo[c] >= 0 {
				cx = append(cx, float64(c))
				cy = append(cy, float64(lo[c]+hi[c])/2)
			}
		}
		if float64(len(cx)) < 0.85*float64(bw) {
			continue // broken up: words in a line
		}
		sort.Float64s(runLens)
		med := runLens[len(runLens)/2]
		if med > 0.35*float64(bh) || med > 3*mm {
			continue // thick in most columns: a word, a box, a block
		}
		if lineResidual(cx, cy) < 0.4*mm {
			continue // a straight rule
		}
		total += float64(bw)
	}
	return total / long
}

// lineResidual is the RMS distance of the points from their least-squares
// line.
func lineResidual(x, y []float64) float64 {
	n := float64(len(x))
	if n < 3 {
		return 0
	}
	a, b := stat.LinearRegression(x, y, nil, false)
	if math.IsNaN(b) || math.IsInf(b, 0) {
		return 0 // all x alike
	}
	var ss float64
	for i := range x {
		e := y[i] - a - b*x[i]
		ss += e * e
	}
	return math.Sqrt(ss / n)
}

// gridPeriod finds the spacing at which the page's darkness repeats
// across (in bands of rows, so a page turned a little keeps its lines
// within a band) and down, by the autocorrelation of the band profiles
// averaged over the bands. 0 for an axis with no clear repeat.
func gridPeriod(d []float32, w, h int, mm float64) (px, py float64) {
	lo := max(2, int(math.Floor(gridMinMM*mm)))
	hi := int(math.Ceil(gridMaxMM * mm))
	band := max(8, int(math.Round(18*mm))) // 18 mm: 5 mm lines stay within ±1 mm at 3°
	px = periodOf(d, w, h, band, lo, hi, false)
	py = periodOf(d, w, h, band, lo, hi, true)
	return
}

func periodOf(d []float32, w, h, band, lo, hi int, down bool) float64 {
	n, m := w, h // profile length, extent banded
	if down {
		n, m = h, w
	}
	if hi >= n/4 || lo >= hi {
		return 0
	}
	acc := make([]float64, hi+2)
	prof := make([]float64, n)
	hp := make([]float64, n)
	bands := 0
	for b0 := 0; b0+band <= m; b0 += band {
		clear(prof)
		for j := b0; j < b0+band; j++ {
			for i := 0; i < n; i++ {
				if down {
					prof[i] += float64(d[i*w+j])
				} else {
					prof[i] += float64(d[j*w+i])
				}
			}
		}
		// Take out the slow changes (a moving mean over 2·hi+1).
		var s float64
		r := hi
		for i := 0; i < min(n, r); i++ {
			s += prof[i]
		}
		for i := 0; i < n; i++ {
			if i+r < n {
				s += prof[i+r]
			}
			if i-r-1 >= 0 {
				s -= prof[i-r-1]
			}
			cnt := float64(min(n-1, i+r) - max(0, i-r) + 1)
			hp[i] = prof[i] - s/cnt
		}
		var e0 float64
		for _, v := range hp {
			e0 += v * v
		}
		if e0 <= 1e-9 {
			continue
		}
		for lag := 1; lag <= hi+1; lag++ {
			var c float64
			for i := 0; i+lag < n; i++ {
				c += hp[i] * hp[i+lag]
			}
			acc[lag] += c / e0 * float64(n) / float64(n-lag)
		}
		bands++
	}
	if bands == 0 {
		return 0
	}
	best, bl := 0.0, 0
	for lag := lo; lag <= hi; lag++ {
		v := acc[lag] / float64(bands)
		if v > acc[lag-1]/float64(bands) && v >= acc[lag+1]/float64(bands) && v > best {
			best, bl = v, lag
		}
	}
	if best < gridPeakNeeded || bl == 0 {
		return 0
	}
	// Parabolic refinement of the peak.
	a, b, c := acc[bl-1], acc[bl], acc[bl+1]
	off := 0.0
	if den := a - 2*b + c; den < 0 {
		off = 0.5 * (a - c) / den
	}
	return float64(bl) + off
}
