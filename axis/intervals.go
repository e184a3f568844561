package axis

import (
	"math"
)

// intervals sets the global intervals (PR, QRS, QT with their spreads
// over beats) and the QT corrections.
func (m *measurer) intervals(f *Findings) {
	iv := Intervals{PR: NaN(), QRS: NaN(), QT: NaN(), QTcBazett: NaN(), QTcFridericia: NaN(), QTcFramingham: NaN(), QTcHodges: NaN(), RR: NaN(), PRSD: NaN(), QRSSD: NaN(), QTSD: NaN(), QTcSD: NaN()}
	get := func(fd fid) (pr, qrs, qt float64) {
		return gridMS(fd.on - fd.pOn), gridMS(fd.off - fd.on), gridMS(fd.tEnd - fd.on)
	}
	pr, qrs, qt := get(m.fid)
	iv.PR, iv.QRS, iv.QT = Num(pr), Num(qrs), Num(qt)

	// Uncertainty: the spread between beats (each dominant beat delineated
	// on the leads that hold it, at most 30 beats), how much the result
	// moves when the thresholds are scaled by 0.7 and 1.4, the grid step,
	// and the digitization quality (up to 10 ms at quality 0, this
	// package's allowance for a trace placed a pixel or two off).
	var bpr, bqrs, bqt []float64
	var dom []int
	for bi := range m.beats {
		if m.dominant(bi) {
			dom = append(dom, bi)
		}
	}
	w := make([]float64, 0, len(m.tpl))
	tp := make([][]float64, 0, len(m.tpl))
	for _, k := range evenly(len(dom), 30) {
		bi := dom[k]
		w, tp = w[:0], tp[:0]
		for si := range m.segs {
			if sg := m.segs[si][bi]; sg != nil {
				tp = append(tp, sg)
				w = append(w, m.qual(m.rec.Signals[si].Lead))
			}
		}
		if len(tp) == 0 {
			continue
		}
		a, b, c := get(delineate(tp, w, m.win.r0, 1))
		bpr, bqrs, bqt = appendOK(bpr, a), appendOK(bqrs, b), appendOK(bqt, c)
	}
	var qs float64
	var nq int
	for _, s := range m.rec.Signals {
		qs += m.qual(s.Lead)
		nq++
	}
	qpen := 10 * (1 - qs/float64(nq))
	sens := func(i int) float64 {
		a0, b0, c0 := get(m.fidS[0])
		a1, b1, c1 := get(m.fidS[1])
		v := [][2]float64{{a0, a1}, {b0, b1}, {c0, c1}}[i]
		d := math.Abs(v[0]-v[1]) / 2
		if math.IsNaN(d) {
			return 0
		}
		return d
	}
	res := 1000 / tplHz / math.Sqrt(12)
	if m.spread == nil {
		m.spread = map[string]float64{}
	}
	names := [3]string{"pr", "qrs", "qt"}
	comb := func(beat []float64, i int) Num {
		_, sd := meanSD(beat)
		if math.IsNaN(sd) {
			sd = 0
		}
		s := sens(i)
		se := sd / math.Sqrt(math.Max(1, float64(len(beat))))
		m.spread[names[i]] = math.Sqrt(se*se + s*s + res*res)
		return Num(math.Sqrt(sd*sd + s*s + res*res + qpen*qpen))
	}
	if iv.PR.OK() {
		iv.PRSD = comb(bpr, 0)
	}
	if iv.QRS.OK() {
		iv.QRSSD = comb(bqrs, 1)
	}
	if iv.QT.OK() {
		iv.QTSD = comb(bqt, 2)
	}
	if f.RRMeanS.OK() {
		rr := float64(f.RRMeanS)
		iv.RR = Num(rr * 1000)
		if iv.QT.OK() {
			c := QTc(qt, rr)
			iv.QTcBazett, iv.QTcFridericia, iv.QTcFramingham, iv.QTcHodges = Num(c.Bazett), Num(c.Fridericia), Num(c.Framingham), Num(c.Hodges)
			// Bazett's QTc error: QT's error scaled, plus the RR spread's
			// effect (∂QTc/∂RR = −QTc/(2RR)) from the RR standard error.
			se := 0.0
			if f.RRSDS.OK() {
				se = float64(f.RRSDS) / math.Sqrt(float64(len(m.beats)))
			}
			a := float64(iv.QTSD) / math.Sqrt(rr)
			b := c.Bazett / (2 * rr) * se
			iv.QTcSD = Num(math.Hypot(a, b))
			m.spread["qtc_bazett"] = math.Hypot(m.spread["qt"]/math.Sqrt(rr), b)
		}
	}
	f.IntervalsMS = iv
}

func appendOK(x []float64, v float64) []float64 {
	if math.IsNaN(v) {
		return x
	}
	return append(x, v)
}

// QTcValues holds a QT corrected for rate by the four published formulas.
type QTcValues struct{ Bazett, Fridericia, Framingham, Hodges float64 }

// QTc corrects a QT interval (ms) for the RR interval (s):
//   - Bazett (Heart 7:353, 1920): QT/√RR
//   - Fridericia (Acta Med Scand 53:469, 1920): QT/∛RR
//   - Framingham (Sagie et al., Am J Cardiol 70:797, 1992): QT + 154·(1−RR)
//   - Hodges (J Am Coll Cardiol 1:694, 1983): QT + 1.75·(HR−60), HR = 60/RR
func QTc(qtMS, rrS float64) QTcValues {
	if !(rrS > 0) {
		n := math.NaN()
		return QTcValues{n, n, n, n}
	}
	return QTcValues{
		Bazett:     qtMS / math.Sqrt(rrS),
		Fridericia: qtMS / math.Cbrt(rrS),
		Framingham: qtMS + 154*(1-rrS),
		Hodges:     qtMS + 1.75*(60/rrS-60),
	}
}
