package compare

import (
	"math"

	"tracelift/axis"
	"tracelift/record"
)

// hexaxial gives each limb lead's direction on the hexaxial circle and
// its gain against the frontal heart vector: the bipolar leads see the
// vector's projection, the augmented leads √3/2 of it (Einthoven's and
// Goldberger's relations, common practice: aVF = II − I/2 = (√3/2)·y).
var hexaxial = map[string]struct{ deg, gain float64 }{
	record.I: {0, 1}, record.II: {60, 1}, record.III: {120, 1},
	record.AVR: {-150, math.Sqrt(3) / 2}, record.AVL: {-30, math.Sqrt(3) / 2}, record.AVF: {90, math.Sqrt(3) / 2},
}

// rotateLimb returns the limb-lead beats of beats (lead name → samples on
// one clock) with the frontal heart vector turned by deg (positive
// clockwise on the page, as hexaxial angles grow). The vector is the
// least-squares fit to the limb leads present, sample by sample; leads
// other than limb leads are left out.
func rotateLimb(beats map[string][]float64, deg float64) map[string][]float64 {
	var names []string
	n := -1
	for _, l := range record.Limb6 {
		if b, ok := beats[l]; ok {
			names = append(names, l)
			if n < 0 || len(b) < n {
				n = len(b)
			}
		}
	}
	if len(names) < 2 {
		return nil
	}
	c, s := math.Cos(deg*math.Pi/180), math.Sin(deg*math.Pi/180)
	out := map[string][]float64{}
	for _, l := range names {
		out[l] = make([]float64, n)
	}
	for k := range n {
		var sxx, sxy, syy, bx, by float64
		for _, l := range names {
			v := beats[l][k]
			if math.IsNaN(v) {
				continue
			}
			h := hexaxial[l]
			gx := h.gain * math.Cos(h.deg*math.Pi/180)
			gy := h.gain * math.Sin(h.deg*math.Pi/180)
			sxx += gx * gx
			sxy += gx * gy
			syy += gy * gy
			bx += gx * v
			by += gy * v
		}
		det := sxx*syy - sxy*sxy
		for _, l := range names {
			if det < 1e-9 {
				out[l][k] = math.NaN()
				continue
			}
			x := (syy*bx - sxy*by) / det
			y := (sxx*by - sxy*bx) / det
			xr, yr := c*x-s*y, s*x+c*y
			h := hexaxial[l]
			out[l][k] = h.gain * (xr*math.Cos(h.deg*math.Pi/180) + yr*math.Sin(h.deg*math.Pi/180))
		}
	}
	return out
}

// source says where a corrected lead is found in the tracing as recorded:
// the named lead, inverted when Sign is −1.
type source struct {
	Lead string
	Sign float64
}

// exchange is a way two tracings' leads may differ by how they were
// recorded or labelled rather than by the heart: for each lead it
// changes, where the true lead is found in the tracing as recorded.
type exchange struct {
	Name string
	Text string
	From map[string]source
}

// electrodeExchanges lists the limb electrode reversals (common practice;
// each follows from Einthoven's triangle: swapping two electrodes inverts
// the lead between them and exchanges the other two, with the augmented
// leads following). Right-leg (neutral) reversals, which flatten a lead,
// are not looked for.
var electrodeExchanges = []exchange{
	{Name: "la_ra_reversed", Text: "left and right arm electrodes look reversed (I inverted, II and III exchanged, aVR and aVL exchanged)",
		From: map[string]source{"I": {"I", -1}, "II": {"III", 1}, "III": {"II", 1}, "aVR": {"aVL", 1}, "aVL": {"aVR", 1}}},
	{Name: "la_ll_reversed", Text: "left arm and left leg electrodes look reversed (I and II exchanged, III inverted, aVL and aVF exchanged)",
		From: map[string]source{"I": {"II", 1}, "II": {"I", 1}, "III": {"III", -1}, "aVL": {"aVF", 1}, "aVF": {"aVL", 1}}},
	{Name: "ra_ll_reversed", Text: "right arm and left leg electrodes look reversed (I, II and III inverted, I and III exchanged, aVR and aVF exchanged)",
		From: map[string]source{"I": {"III", -1}, "II": {"II", -1}, "III": {"I", -1}, "aVR": {"aVF", 1}, "aVF": {"aVR", 1}}},
	// Arm cable on the left arm, left-arm cable on the leg, leg cable on
	// the right arm: recorded I = true III, II = −true I, III = −true II.
	{Name: "limb_electrodes_rotated", Text: "the three limb electrodes look moved round by one place (RA on LA, LA on LL, LL on RA)",
		From: map[string]source{"I": {"II", -1}, "II": {"III", -1}, "III": {"I", 1}, "aVR": {"aVF", 1}, "aVL": {"aVR", 1}, "aVF": {"aVL", 1}}},
	// The other way round: recorded I = −true II, II = −true III,
	// III = true I.
	{Name: "limb_electrodes_rotated_back", Text: "the three limb electrodes look moved round by one place (RA on LL, LA on RA, LL on LA)",
		From: map[string]source{"I": {"III", 1}, "II": {"I", -1}, "III": {"II", -1}, "aVR": {"aVL", 1}, "aVL": {"aVF", 1}, "aVF": {"aVR", 1}}},
}

// labelSwaps lists every exchange of two standard leads' labels (a lead
// named wrongly on the printout or by the reader).
func labelSwaps() []exchange {
	var out []exchange
	for i, a := range record.Standard12 {
		for _, b := range record.Standard12[i+1:] {
			out = append(out, exchange{
				Name: "swapped_" + a + "_" + b,
				Text: "leads " + a + " and " + b + " look exchanged (labelled one for the other)",
				From: map[string]source{a: {b, 1}, b: {a, 1}},
			})
		}
	}
	return out
}

// apply returns rec with the exchange undone: every lead the exchange
// changes is taken from where it was recorded. Leads it leaves alone are
// copied as they are.
func (e exchange) apply(rec *record.Record) *record.Record {
	out := rec.Clone()
	for i := range out.Signals {
		l := out.Signals[i].Lead
		src, ok := e.From[l]
		if !ok {
			continue
		}
		from := rec.Lead(src.Lead)
		s := from.Clone()
		s.Lead = l
		if src.Sign < 0 {
			for k := range s.MV {
				s.MV[k] = -s.MV[k]
			}
		}
		out.Signals[i] = s
	}
	return out
}

// applyQuality maps per-lead confidences through the exchange.
func (e exchange) applyQuality(q map[string]float64) map[string]float64 {
	if q == nil {
		return nil
	}
	out := map[string]float64{}
	for l, v := range q {
		out[l] = v
	}
	for l, src := range e.From {
		if v, ok := q[src.Lead]; ok {
			out[l] = v
		}
	}
	return out
}

// covers reports whether every lead the exchange touches is in both.
func (e exchange) covers(a, b map[string][]float64) bool {
	for l, src := range e.From {
		if a[l] == nil || b[src.Lead] == nil || b[l] == nil {
			return false
		}
	}
	return true
}

// netVector returns the magnitude (mV·ms, in lead I's units) of the net
// frontal vector of a wave of f's representative beats, a least-squares
// fit to the net areas of the limb leads present, and the wave's span in
// ms (QRS onset to offset; P onset to offset; QRS offset to T end). Zero
// when it cannot be measured.
func netVector(f *axis.Findings, item string) (mag, spanMS float64) {
	mag, _, spanMS = netVectorAt(f, item, 0)
	return mag, spanMS
}

// netVectorAt is netVector with the wave's window moved by lag samples,
// and also returns the vector's hexaxial angle in degrees.
func netVectorAt(f *axis.Findings, item string, lag int) (mag, deg, spanMS float64) {
	if f == nil {
		return 0, 0, 0
	}
	fd := f.Fiducials
	var from, to axis.Num
	switch item {
	case ItemQRSAxis:
		from, to = fd.QRSOn, fd.QRSOff
	case ItemPAxis:
		from, to = fd.POn, fd.POff
	default:
		from, to = fd.QRSOff, fd.TEnd
	}
	if !from.OK() || !to.OK() || !fd.QRSOn.OK() || to <= from {
		return 0, 0, 0
	}
	var sxx, sxy, syy, bx, by float64
	n := 0
	for _, l := range record.Limb6 {
		x, r0 := template(f, l)
		if x == nil {
			continue
		}
		// Baseline: the 8 ms before the QRS onset (before the P onset for
		// P), as the engine measures areas.
		b0 := r0 + lag + int(math.Round(float64(fd.QRSOn)/gridMS))
		if item == ItemPAxis {
			b0 = r0 + lag + int(math.Round(float64(fd.POn)/gridMS))
		}
		i0 := r0 + lag + int(math.Round(float64(from)/gridMS))
		i1 := r0 + lag + int(math.Round(float64(to)/gridMS))
		if b0 < 4 || i0 < 0 || i1 >= len(x) {
			continue
		}
		var base float64
		for k := b0 - 4; k <= b0; k++ {
			base += x[k]
		}
		base /= 5
		var area float64
		for k := i0; k <= i1; k++ {
			if !math.IsNaN(x[k]) {
				area += (x[k] - base) * gridMS
			}
		}
		if math.IsNaN(area) {
			continue
		}
		h := hexaxial[l]
		gx := h.gain * math.Cos(h.deg*math.Pi/180)
		gy := h.gain * math.Sin(h.deg*math.Pi/180)
		sxx += gx * gx
		sxy += gx * gy
		syy += gy * gy
		bx += gx * area
		by += gy * area
		n++
	}
	det := sxx*syy - sxy*sxy
	if n < 2 || det < 1e-9 {
		return 0, 0, 0
	}
	vx := (syy*bx - sxy*by) / det
	vy := (sxx*by - sxy*bx) / det
	return math.Hypot(vx, vy), math.Atan2(vy, vx) * 180 / math.Pi, float64(to - from)
}

// transitionAt places the precordial transition where log(R/|S|) crosses
// zero between neighbouring leads V1..V6 (r, s indexed 0..5, NaN where
// missing), as the measurement engine does (a floor of 0.01 mV on both):
// 1 when V1 is already R-dominant, 6 when V6 still is not, NaN when it
// cannot be placed.
func transitionAt(r, s []float64) float64 {
	ratio := make([]float64, 6)
	first, last := -1, -1
	for i := range 6 {
		ratio[i] = math.NaN()
		if math.IsNaN(r[i]) || math.IsNaN(s[i]) {
			continue
		}
		ratio[i] = math.Log(math.Max(math.Max(r[i], 0), 0.01) / math.Max(math.Abs(s[i]), 0.01))
		if first < 0 {
			first = i
		}
		last = i
	}
	if first < 0 || last == first {
		return math.NaN()
	}
	for i := first; i < last; i++ {
		a, b := ratio[i], ratio[i+1]
		if !math.IsNaN(a) && !math.IsNaN(b) && a < 0 && b >= 0 {
			return float64(i+1) + (0-a)/(b-a)
		}
	}
	switch {
	case ratio[first] >= 0 && first == 0:
		return 1
	case ratio[last] < 0 && last == 5:
		return 6
	}
	return math.NaN()
}
