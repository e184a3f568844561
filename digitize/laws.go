package digitize

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"

	"tracelift/record"
)

// limbCoef gives each limb lead as a·I + b·II (Einthoven: III = II − I;
// Goldberger: aVR = −(I+II)/2, aVL = I − II/2, aVF = II − I/2).
var limbCoef = map[string][2]float64{
	record.I:   {1, 0},
	record.II:  {0, 1},
	record.III: {-1, 1},
	record.AVR: {-0.5, -0.5},
	record.AVL: {1, -0.5},
	record.AVF: {-0.5, 1},
}

// window is a stretch of the tracing clock in which some leads were
// recorded simultaneously (a column of panels).
type window struct {
	col    int
	t0, t1 float64
}

// limbSet is the limb leads present over a window, sampled on a common
// grid where all of them have a value, means removed.
type limbSet struct {
	names []string
	y     [][]float64 // [lead][sample], mean removed
	mean  []float64
	start []int // index in the lead's signal of the window's first sample
	mask  []bool
}

func gatherLimbs(rec *record.Record, w window) *limbSet {
	ls := &limbSet{}
	var sigs []*record.Signal
	for _, name := range record.Limb6 {
		s := rec.Lead(name)
		if s == nil {
			continue
		}
		// Present if the lead covers most of the window.
		if s.StartS > w.t0+0.05 || s.EndS() < w.t1-0.05 {
			continue
		}
		sigs = append(sigs, s)
		ls.names = append(ls.names, name)
	}
	if len(sigs) == 0 {
		return ls
	}
	rate := sigs[0].RateHz
	n := int(math.Round((w.t1 - w.t0) * rate))
	ls.mask = make([]bool, n)
	ls.start = make([]int, len(sigs))
	for k, s := range sigs {
		ls.start[k] = int(math.Round((w.t0 - s.StartS) * s.RateHz))
	}
	for i := 0; i < n; i++ {
		ok := true
		for k, s := range sigs {
			j := ls.start[k] + i
			if j < 0 || j >= len(s.MV) || math.IsNaN(s.MV[j]) {
				ok = false
				break
			}
		}
		ls.mask[i] = ok
	}
	ls.y = make([][]float64, len(sigs))
	ls.mean = make([]float64, len(sigs))
	for k, s := range sigs {
		v := make([]float64, 0, n)
		for i := 0; i < n; i++ {
			if ls.mask[i] {
				v = append(v, s.MV[ls.start[k]+i])
			}
		}
		m := 0.0
		for _, x := range v {
			m += x
		}
		if len(v) > 0 {
			m /= float64(len(v))
		}
		for i := range v {
			v[i] -= m
		}
		ls.y[k] = v
		ls.mean[k] = m
	}
	return ls
}

func (ls *limbSet) samples() int {
	if len(ls.y) == 0 {
		return 0
	}
	return len(ls.y[0])
}

func (ls *limbSet) find(name string) int {
	for k, n := range ls.names {
		if n == name {
			return k
		}
	}
	return -1
}

// fit2 is the least-squares heart-vector (I, II) from the leads in use,
// as a function of the sample: the 2×n map (AᵀA)⁻¹Aᵀ of the leads'
// coefficients is the same at every sample, so gonum computes it once and
// each sample is a weighted sum. ok is false when the leads do not span
// two dimensions.
func (ls *limbSet) fit2(use []int) (at func(i int) (a, b float64), ok bool) {
	if len(use) < 2 {
		return nil, false
	}
	A := mat.NewDense(len(use), 2, nil)
	for r, k := range use {
		c := limbCoef[ls.names[k]]
		A.Set(r, 0, c[0])
		A.Set(r, 1, c[1])
	}
	var ata, inv, M mat.Dense
	ata.Mul(A.T(), A)
	if err := inv.Inverse(&ata); err != nil {
		return nil, false
	}
	M.Mul(&inv, A.T())
	wa, wb := mat.Row(nil, 0, &M), mat.Row(nil, 1, &M)
	ys := make([][]float64, len(use))
	for r, k := range use {
		ys[r] = ls.y[k]
	}
	return func(i int) (a, b float64) {
		for r, y := range ys {
			a += wa[r] * y[i]
			b += wb[r] * y[i]
		}
		return a, b
	}, true
}

// residualEnergy is Σ over samples and leads in use of the squared
// residual of their own least-squares fit.
func (ls *limbSet) residualEnergy(use []int) float64 {
	fit, ok := ls.fit2(use)
	if !ok {
		return math.NaN()
	}
	e := 0.0
	for i := 0; i < ls.samples(); i++ {
		a, b := fit(i)
		for _, k := range use {
			c := limbCoef[ls.names[k]]
			d := ls.y[k][i] - c[0]*a - c[1]*b
			e += d * d
		}
	}
	return e
}

// predictRMS is the RMS error (mV) of lead k predicted from the others;
// NaN when the others do not determine it.
func (ls *limbSet) predictRMS(k int) float64 {
	var use []int
	for j := range ls.names {
		if j != k {
			use = append(use, j)
		}
	}
	if len(use) < 2 || ls.samples() == 0 {
		return math.NaN()
	}
	c := limbCoef[ls.names[k]]
	fit, ok := ls.fit2(use)
	if !ok {
		return math.NaN()
	}
	e := 0.0
	for i := 0; i < ls.samples(); i++ {
		a, b := fit(i)
		d := ls.y[k][i] - c[0]*a - c[1]*b
		e += d * d
	}
	return math.Sqrt(e / float64(ls.samples()))
}

// rmsOf returns the RMS (mV) of Σ w_k·lead_k, or NaN if a lead is absent.
func (ls *limbSet) rmsOf(terms map[string]float64) float64 {
	idx := map[int]float64{}
	for n, w := range terms {
		k := ls.find(n)
		if k < 0 {
			return math.NaN()
		}
		idx[k] = w
	}
	n := ls.samples()
	if n == 0 {
		return math.NaN()
	}
	e := 0.0
	for i := 0; i < n; i++ {
		s := 0.0
		for k, w := range idx {
			s += w * ls.y[k][i]
		}
		e += s * s
	}
	return math.Sqrt(e / float64(n))
}

// nanToNeg turns "not measurable" into −1 so results stay JSON-safe.
func nanToNeg(v float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return -1
	}
	return v
}

// lawChecks measures the limb-lead laws per window. conf gives each
// lead's tracing confidence (used only to name a culprit when three leads
// cannot tell which of them is off). It also returns, per lead, the mean
// RMS (µV) of its prediction from the other simultaneous limb leads.
func lawChecks(rec *record.Record, wins []window, conf map[string]float64) ([]LawCheck, map[string]float64) {
	var out []LawCheck
	perLead := map[string][]float64{}
	for _, w := range wins {
		ls := gatherLimbs(rec, w)
		if len(ls.names) < 3 || ls.samples() < 10 {
			continue
		}
		lc := LawCheck{Column: w.col, T0S: w.t0, T1S: w.t1}
		lc.EinthovenRMSuV = nanToNeg(1000 * ls.rmsOf(map[string]float64{record.I: 1, record.III: 1, record.II: -1}))
		gold := []struct {
			lead  string
			terms map[string]float64
		}{
			{record.AVR, map[string]float64{record.AVR: 1, record.I: 0.5, record.II: 0.5}},
			{record.AVL, map[string]float64{record.AVL: 1, record.I: -1, record.II: 0.5}},
			{record.AVF, map[string]float64{record.AVF: 1, record.II: -1, record.I: 0.5}},
		}
		for g, gr := range gold {
			v := ls.rmsOf(gr.terms)
			if math.IsNaN(v) {
				if k := ls.find(gr.lead); k >= 0 {
					v = ls.predictRMS(k)
				}
			}
			lc.GoldbergerRMSuV[g] = nanToNeg(1000 * v)
		}
		pred := make([]float64, len(ls.names))
		for k, n := range ls.names {
			pred[k] = ls.predictRMS(k)
			if !math.IsNaN(pred[k]) {
				perLead[n] = append(perLead[n], 1000*pred[k])
			}
		}
		if len(ls.names) >= 4 {
			// The lead whose removal leaves the others most consistent.
			best, bestE := -1, math.Inf(1)
			for k := range ls.names {
				var use []int
				for j := range ls.names {
					if j != k {
						use = append(use, j)
					}
				}
				if e := ls.residualEnergy(use); e < bestE {
					best, bestE = k, e
				}
			}
			if best >= 0 {
				lc.Worst = ls.names[best]
			}
		} else {
			best, bc := -1, math.Inf(1)
			for k, n := range ls.names {
				if c := conf[n]; c < bc {
					best, bc = k, c
				}
			}
			if best >= 0 {
				lc.Worst = ls.names[best]
			}
		}
		out = append(out, lc)
	}
	res := map[string]float64{}
	for n, v := range perLead {
		s := 0.0
		for _, x := range v {
			s += x
		}
		res[n] = s / float64(len(v))
	}
	return out, res
}

// reconcile returns a copy of rec in which, over every window with at
// least three simultaneous limb leads, the limb leads are replaced by
// their least-squares projection onto the two-dimensional space the
// laws allow (each lead keeps its own mean over the window). Other leads
// and stretches are copied unchanged.
func reconcile(rec *record.Record, wins []window) *record.Record {
	out := rec.Clone()
	out.Name = rec.Name + " (limb leads reconciled by least squares)"
	for _, w := range wins {
		ls := gatherLimbs(rec, w)
		if len(ls.names) < 3 {
			continue
		}
		use := make([]int, len(ls.names))
		for k := range use {
			use[k] = k
		}
		sigs := make([]*record.Signal, len(ls.names))
		for k, n := range ls.names {
			sigs[k] = out.Lead(n)
		}
		fit, fine := ls.fit2(use)
		if !fine {
			continue
		}
		m := 0
		for i, ok := range ls.mask {
			if !ok {
				continue
			}
			a, b := fit(m)
			for k, n := range ls.names {
				c := limbCoef[n]
				sigs[k].MV[ls.start[k]+i] = c[0]*a + c[1]*b + ls.mean[k]
			}
			m++
		}
	}
	return out
}

// windowsOf returns the column windows of simultaneous panels.
func windowsOf(panels []Panel) []window {
	seen := map[int]window{}
	for _, p := range panels {
		if p.Rhythm {
			continue
		}
		if _, ok := seen[p.Col]; !ok {
			seen[p.Col] = window{col: p.Col, t0: p.T0S, t1: p.T1S}
		}
	}
	var out []window
	for _, w := range seen {
		out = append(out, w)
	}
	if len(out) == 0 { // strips only: one window over the first strip
		for _, p := range panels {
			out = append(out, window{col: 0, t0: p.T0S, t1: p.T1S})
			break
		}
	}
	sort.Slice(out, func(i, j int) bool { return out[i].col < out[j].col })
	return out
}

// lawScore is the limb leads' relative disagreement with the laws:
// residual energy over signal energy, summed over the windows.
func lawScore(rec *record.Record, wins []window) float64 {
	var er, es float64
	for _, w := range wins {
		ls := gatherLimbs(rec, w)
		if len(ls.names) < 3 || ls.samples() < 10 {
			continue
		}
		all := make([]int, len(ls.names))
		for k := range all {
			all[k] = k
		}
		e := ls.residualEnergy(all)
		if math.IsNaN(e) {
			continue
		}
		er += e
		for _, y := range ls.y {
			for _, v := range y {
				es += v * v
			}
		}
	}
	if es == 0 {
		return 0
	}
	return er / es
}
