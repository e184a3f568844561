package coverage

import (
	"fmt"
	"io"
	"math"
	"sort"

	"tracelift/axis"
)

// isAngle reports whether a measure is an axis in degrees (its picture
// share stops at 180° and its interval at a whole turn).
func isAngle(measure string) bool { return measure == "qrs_deg" }

// bounds is the 90 % interval the pipeline states for m on the page of
// c under model (axis.Measure's arithmetic, from the shares recorded in
// m): symmetric about the value, stretched to hold the reading at the
// other time scale when that is in doubt (axis.WidenForTimeScale).
func bounds(measure string, m Meas, c Case, model axis.PictureModel) (lo, hi float64) {
	p := pictureSD(measure, m, c, model)
	h := axis.Z90 * math.Hypot(m.EngineSD, p)
	if isAngle(measure) && h > 180 {
		h = 180
	}
	lo, hi = m.Est-h, m.Est+h
	if c.Doubts.TimeScale() {
		lo, hi = axis.WidenForTimeScale(measure, m.Est, lo, hi, c.Doubts.TimeRatio)
	}
	return lo, hi
}

func pictureSD(measure string, m Meas, c Case, model axis.PictureModel) float64 {
	pic := c.Page
	pic.Model = &model
	p := pic.Factor(measure, c.MeanConf, c.Doubts) * model.Size(measure) * m.Unit
	if isAngle(measure) {
		p = math.Min(180, p)
	}
	return p
}

// Restate returns the cases with every interval (and picture share)
// stated as the pipeline would under model, without tracing the pages
// again: the model changes the intervals only.
func Restate(cases []Case, model axis.PictureModel) []Case {
	out := make([]Case, len(cases))
	for i, c := range cases {
		c.Meas = map[string]Meas{}
		for name, m := range cases[i].Meas {
			m.Lo, m.Hi = bounds(name, m, c, model)
			m.PictureSD = pictureSD(name, m, c, model)
			c.Meas[name] = m
		}
		out[i] = c
	}
	return out
}

// score is the interval score of [lo, hi] for the truth of m (on the
// circle for an angle, whose intervals are symmetric).
func score(measure string, m Meas, lo, hi float64) float64 {
	if isAngle(measure) {
		h := (hi - lo) / 2
		return 2*h + 20*math.Max(0, math.Abs(m.Err(measure))-h)
	}
	return hi - lo + 20*(math.Max(0, lo-m.Truth)+math.Max(0, m.Truth-hi))
}

// FactPenalty charges the width a page's facts add once more, on top of
// the interval score's own charge, so that a fact must pay for itself
// over more pages before it earns a weight (shrinkage against fitting
// the few pages of one seed).
var FactPenalty = 0.0

// fitGroups are the measures fitted together: each sets one size and one
// set of weights (QTc takes QT's).
var fitGroups = [][]string{{"heart_rate_bpm"}, {"pr"}, {"qrs"}, {"qt", "qtc_bazett"}, {"qrs_deg"}}

// FitPage fits the picture model to the readable cases: for each group
// of measures the size and the weights of the page's facts that minimise
// the mean interval score of the 90 % interval (Gneiting and Raftery
// 2007, eq. 43: its width plus 2/α = 20 times the distance by which it
// misses the truth; a proper score, so the fitted intervals are neither
// wider nor narrower than the errors need), then the size alone set so
// that the intervals hold the truth in share of the cases. Weights stay
// at 0 or above: a fact can only widen an interval. The P and T sizes
// are kept from model; their weights become the QRS axis's.
func FitPage(cases []Case, model axis.PictureModel, share float64) axis.PictureModel {
	out := model
	for _, g := range fitGroups {
		type row struct {
			name string
			m    Meas
			c    Case
		}
		var rows []row
		for _, c := range cases {
			if !Readable(c) || !c.Page.Digitized {
				continue
			}
			for _, name := range g {
				if m, ok := c.Meas[name]; ok {
					rows = append(rows, row{name, m, c})
				}
			}
		}
		if len(rows) == 0 {
			continue
		}
		set := func(md *axis.PictureModel, s float64, w axis.PageWeights) {
			switch g[0] {
			case "heart_rate_bpm":
				md.HRPercent, md.HR = s, w
			case "pr":
				md.PRMS, md.PR = s, w
			case "qrs":
				md.QRSMS, md.QRS = s, w
			case "qt":
				md.QTMS, md.QT = s, w
			default:
				md.QRSAreaMVMS, md.Axis = s, w
			}
		}
		decode := func(x []float64) (float64, axis.PageWeights) {
			var w [axis.PageFacts]float64
			for i := range w {
				w[i] = x[1+i] * x[1+i]
			}
			return math.Exp(x[0]), axis.WeightsFrom(w)
		}
		mean := func(x []float64) float64 {
			md := out
			s, w := decode(x)
			set(&md, s, w)
			var sum float64
			for _, r := range rows {
				lo, hi := bounds(r.name, r.m, r.c, md)
				sum += score(r.name, r.m, lo, hi)
				if FactPenalty > 0 {
					pic := r.c.Page
					pic.Model = &md
					sum += FactPenalty * 2 * axis.Z90 * (pic.Factor(r.name, r.c.MeanConf, r.c.Doubts) - 1) * s * r.m.Unit
				}
			}
			return sum / float64(len(rows))
		}
		// Starts: the model's own weights and none, each at the model's
		// size and at an eighth to twice it (the score has local minima
		// where a small size and large weights trade against a large size
		// and small ones).
		start := func(s float64, w axis.PageWeights) []float64 {
			x := []float64{math.Log(math.Max(1e-3, s))}
			for _, v := range w.Slice() {
				x = append(x, math.Sqrt(math.Max(0, v)))
			}
			return x
		}
		s0 := out.Size(g[0])
		best, bestF := start(s0, out.Weights(g[0])), math.Inf(1)
		for _, sm := range []float64{0.125, 0.25, 0.5, 1, 2} {
			for _, w := range []axis.PageWeights{out.Weights(g[0]), {}} {
				if x, f := patternSearch(mean, start(sm*s0, w)); f < bestF {
					best, bestF = x, f
				}
			}
		}
		s, w := decode(best)
		set(&out, s, w)
		// The size for the share, the weights held.
		cover := func(s float64) float64 {
			md := out
			set(&md, s, w)
			n := 0
			for _, r := range rows {
				m := r.m
				m.Lo, m.Hi = bounds(r.name, r.m, r.c, md)
				if covered(r.name, m) {
					n++
				}
			}
			return float64(n) / float64(len(rows))
		}
		lo, hi := 0.0, 1000*math.Max(s, 1e-3)
		for k := 0; k < 60; k++ {
			mid := (lo + hi) / 2
			if cover(mid) < share {
				lo = mid
			} else {
				hi = mid
			}
		}
		set(&out, hi, w)
	}
	return out
}

// HalfWidths writes the median half-width of the 90 % intervals by
// measurement and condition over the pages that may be read.
func HalfWidths(w io.Writer, cases []Case, conds []string) {
	groups := append(append([]string(nil), conds...), "all")
	fmt.Fprintf(w, "median half-width of the 90 %% intervals (bpm, ms, degrees)\n%-10s", "condition")
	for _, m := range Measures {
		fmt.Fprintf(w, " %14s", m)
	}
	fmt.Fprintln(w)
	for _, g := range groups {
		fmt.Fprintf(w, "%-10s", g)
		for _, name := range Measures {
			var hs []float64
			for _, c := range cases {
				if m, ok := c.Meas[name]; ok && Readable(c) && (g == "all" || c.Condition == g) {
					hs = append(hs, (m.Hi-m.Lo)/2)
				}
			}
			med := math.NaN()
			if len(hs) > 0 {
				sort.Float64s(hs)
				med = hs[len(hs)/2]
				if len(hs)%2 == 0 {
					med = (hs[len(hs)/2-1] + hs[len(hs)/2]) / 2
				}
			}
			fmt.Fprintf(w, " %14.2f", med)
		}
		fmt.Fprintln(w)
	}
}

// patternSearch minimises f from x0 by compass search (Kolda, Lewis and
// Torczon 2003): each coordinate is moved by ±step while that lowers f,
// and the step is halved when no move does. It needs no gradient, which
// the interval score (piecewise linear) lacks.
func patternSearch(f func([]float64) float64, x0 []float64) ([]float64, float64) {
	x := append([]float64(nil), x0...)
	fx := f(x)
	for step := 1.0; step > 1e-3; {
		moved := false
		for i := range x {
			for _, d := range []float64{step, -step} {
				y := append([]float64(nil), x...)
				y[i] += d
				if fy := f(y); fy < fx-1e-12 {
					x, fx, moved = y, fy, true
					break
				}
			}
		}
		if !moved {
			step /= 2
		}
	}
	return x, fx
}
