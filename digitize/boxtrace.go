package digitize

import (
	"errors"
	"fmt"
	"math"

	"tracelift/calib"
)

// ErrNoTraceInBox is returned when a box drawn by hand holds no trace the
// tracer can follow.
var ErrNoTraceInBox = errors.New("digitize: no trace found in the box; draw it around the lead's trace, from its first column to its last")

// BoxTracer follows traces inside boxes given by hand on a reading's
// rectified page: a panel the layout search did not find, or the columns
// a box was widened over. It prepares the page's working map once (the
// same map Run traces on) and may be used for many boxes. It is not safe
// for concurrent use.
type BoxTracer struct {
	g       *gray
	pxPerMM float64
}

// NewBoxTracer prepares the page of cal as Run left it (turned and
// straightened).
func NewBoxTracer(cal *calib.Result) (*BoxTracer, error) {
	if cal == nil || (cal.Ink == nil && cal.Rectified == nil) || !(cal.PxPerMM > 0) || math.IsInf(cal.PxPerMM, 0) {
		return nil, ErrInput
	}
	ink := cal.Ink
	if ink == nil {
		ink = calib.InkOf(cal.Rectified, cal.PxPerMM)
	}
	return &BoxTracer{g: prepare(ink, cal.PxPerMM), pxPerMM: cal.PxPerMM}, nil
}

// minBoxMM is the least width and height of a box to trace in: 2 mm is
// under a tenth of a second at 25 mm/s and a fifth of a mV at 10 mm/mV.
const minBoxMM = 2

// Trace follows the trace in box (x0, y0, x1, y1, rectified px) the way
// Run follows a panel: by dynamic programming along the columns of the
// box, pulled towards the box's densest line of ink (the trace's zero
// line, as findRows takes it) and free to stray above and below the box
// as far as Run's own bands reach (Run draws a panel's box from 0.58 of
// the row pitch above its baseline to 0.42 below and traces within 0.95
// pitch of it; the box's height stands for the pitch here). It returns
// the trace (columns from round(x0), continuous y, NaN where lost) and
// the baseline y, the most common level of the trace.
func (bt *BoxTracer) Trace(box [4]float64) (Trace, float64, error) {
	g := bt.g
	for _, v := range box {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return Trace{}, 0, fmt.Errorf("digitize: the box %v is not a finite rectangle", box)
		}
	}
	x0 := max(0, int(math.Round(box[0])))
	x1 := min(g.w, int(math.Round(box[2])))
	y0 := max(0, int(math.Round(box[1])))
	y1 := min(g.h, int(math.Round(box[3])))
	least := int(math.Ceil(minBoxMM * bt.pxPerMM))
	if x1-x0 < least || y1-y0 < least {
		return Trace{}, 0, fmt.Errorf("digitize: the box is too small or off the page (it needs at least %d mm either way on the page)", minBoxMM)
	}
	// The densest line of ink across the box is the trace's zero line.
	home, best := -1, 0
	for y := y0; y < y1; y++ {
		s := 0
		row := g.pix[y*g.w : (y+1)*g.w]
		for x := x0; x < x1; x++ {
			s += int(row[x])
		}
		if s > best {
			home, best = y, s
		}
	}
	if home < 0 {
		return Trace{}, 0, ErrNoTraceInBox
	}
	h := float64(y1 - y0)
	b := band{x0: x0, x1: x1, home: float64(home) + 0.5, pitch: h,
		y0: max(0, int(math.Floor(float64(y0)-0.4*h))), y1: min(g.h, int(math.Ceil(float64(y1)+0.5*h)))}
	b.halfLine = math.Max(strokeHalfWidth(g, []rowInfo{{base: b.home, x0: x0, x1: x1}}, bt.pxPerMM), 1)
	e := followPath(g, b)
	if e == nil {
		return Trace{}, 0, ErrNoTraceInBox
	}
	ys, cf := e.finish(fitPenRadius([]*pathEdges{e}, b.halfLine))
	tr := Trace{X0: x0, Y: make([]float64, len(ys)), Conf: cf}
	found := 0
	for i, y := range ys {
		tr.Y[i] = y + 0.5 // pixel index to continuous coordinates, as Run's traces
		if !math.IsNaN(y) {
			found++
		}
	}
	clipEnds(tr.Y, int(math.Ceil(b.halfLine+0.3*bt.pxPerMM)), math.Max(2, 0.3*bt.pxPerMM))
	// A box over blank paper gives a path of paper, which the tracer
	// marks lost; under half the columns traced is no trace.
	if 2*found < len(ys) {
		return Trace{}, 0, ErrNoTraceInBox
	}
	base := modeY(tr.Y)
	if math.IsNaN(base) {
		base = b.home
	}
	return tr, base, nil
}

// clipEnds makes gaps of the last columns at either end of ys, within
// margin of the end, from the first one that jumps more than tol px from
// its neighbour inwards: a box's edge on a column boundary reaches the
// separator tick there, which Run keeps clear of by the same margin (half
// a line and 0.3 mm, traceRows) and fillEdge stops at by the same jump.
func clipEnds(ys []float64, margin int, tol float64) {
	n := len(ys)
	if n < 2*margin+2 {
		return
	}
	for _, dir := range []int{-1, 1} {
		i := margin
		if dir > 0 {
			i = n - 1 - margin
		}
		for k := 0; k < margin; k++ {
			j := i + dir
			if !math.IsNaN(ys[i]) && !math.IsNaN(ys[j]) && math.Abs(ys[j]-ys[i]) > tol {
				for ; j >= 0 && j < n; j += dir {
					ys[j] = math.NaN()
				}
				break
			}
			i = j
		}
	}
}
