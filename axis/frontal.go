package axis

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"tracelift/record"
)

// Hexaxial angles of the limb leads in degrees (common practice: I 0°,
// II +60°, III +120°, aVR −150°, aVL −30°, aVF +90°).
var hexaxial = map[string]float64{
	record.I: 0, record.II: 60, record.III: 120,
	record.AVR: -150, record.AVL: -30, record.AVF: 90,
}

func isLimb(lead string) bool { _, ok := hexaxial[lead]; return ok }

// augmented reports whether a limb lead is one of Goldberger's augmented
// leads. In Einthoven's triangle these read √3/2 of the heart vector's
// projection on their direction (Goldberger 1942), while I, II and III read
// the full projection; augScale undoes that.
func augmented(lead string) bool {
	return lead == record.AVR || lead == record.AVL || lead == record.AVF
}

var augScale = 2 / math.Sqrt(3)

// perpendicular pairs of the hexaxial system (common practice).
var perpLead = map[string]string{
	record.I: record.AVF, record.AVF: record.I,
	record.II: record.AVL, record.AVL: record.II,
	record.III: record.AVR, record.AVR: record.III,
}

// projections returns, for the limb leads present in net, the values
// rescaled to the heart vector's projection on each lead's direction.
func projections(net map[string]float64) map[string]float64 {
	out := map[string]float64{}
	for l, v := range net {
		if _, ok := hexaxial[l]; !ok || math.IsNaN(v) {
			continue
		}
		if augmented(l) {
			v *= augScale
		}
		out[l] = v
	}
	return out
}

// lsqFit fits the frontal heart vector (x toward lead I, y toward aVF)
// to the projections by least squares: proj_L = x·cos θ_L + y·sin θ_L.
// It returns the vector and the 2×n map M = (AᵀA)⁻¹Aᵀ in lead order for
// uncertainty propagation; ok is false with fewer than two leads.
func lsqFit(proj map[string]float64) (x, y float64, m map[string][2]float64, ok bool) {
	if len(proj) < 2 {
		return 0, 0, nil, false
	}
	leads := make([]string, 0, len(proj))
	for l := range proj {
		leads = append(leads, l)
	}
	A := mat.NewDense(len(leads), 2, nil)
	b := mat.NewVecDense(len(leads), nil)
	for r, l := range leads {
		th := hexaxial[l] * math.Pi / 180
		A.Set(r, 0, math.Cos(th))
		A.Set(r, 1, math.Sin(th))
		b.SetVec(r, proj[l])
	}
	// M = (AᵀA)⁻¹Aᵀ, and the vector M·b.
	var ata, inv, M mat.Dense
	ata.Mul(A.T(), A)
	if err := inv.Inverse(&ata); err != nil {
		return 0, 0, nil, false
	}
	M.Mul(&inv, A.T())
	var v mat.VecDense
	v.MulVec(&M, b)
	m = make(map[string][2]float64, len(leads))
	for r, l := range leads {
		m[l] = [2]float64{M.At(0, r), M.At(1, r)}
	}
	return v.AtVec(0), v.AtVec(1), m, true
}

// lsqAngleSD propagates independent per-lead errors sd (in the units of
// the unscaled lead values) through the fit to an angle SD in degrees.
func lsqAngleSD(x, y float64, m map[string][2]float64, sd map[string]float64) float64 {
	h := math.Hypot(x, y)
	if h == 0 {
		return 180
	}
	ux, uy := -y/h, x/h // perpendicular to the vector
	var v float64
	for l, mm := range m {
		s := sd[l]
		if augmented(l) {
			s *= augScale
		}
		g := ux*mm[0] + uy*mm[1]
		v += g * g * s * s
	}
	return math.Atan(math.Sqrt(v)/h) * 180 / math.Pi
}

// deg returns atan2 in degrees in (−180, 180].
func deg(y, x float64) float64 {
	a := math.Atan2(y, x) * 180 / math.Pi
	if a <= -180 {
		a += 360
	}
	return a
}

// angDiff is the signed difference a−b wrapped to (−180, 180].
func angDiff(a, b float64) float64 {
	d := math.Mod(a-b, 360)
	if d > 180 {
		d -= 360
	}
	if d <= -180 {
		d += 360
	}
	return d
}

// wrap brings an angle to (−180, 180].
func wrap(a float64) float64 { return angDiff(a, 0) }

// axisLSQ is the least-squares net-area method.
func axisLSQ(net map[string]float64) (float64, string, bool) {
	p := projections(net)
	x, y, _, ok := lsqFit(p)
	if !ok || math.Hypot(x, y) == 0 {
		return math.NaN(), "fewer than two limb leads", false
	}
	return deg(y, x), fmt.Sprintf("net-area vector fitted to %d limb leads (aVR, aVL, aVF ×2/√3)", len(p)), true
}

// axisQuadrant is the two-lead method on I and aVF.
func axisQuadrant(net map[string]float64) (float64, string, bool) {
	i, ok1 := net[record.I]
	f, ok2 := net[record.AVF]
	if !ok1 || !ok2 || math.IsNaN(i) || math.IsNaN(f) || (i == 0 && f == 0) {
		return math.NaN(), "needs I and aVF", false
	}
	q := ""
	switch {
	case i >= 0 && f >= 0:
		q = "I+ aVF+: 0° to +90°"
	case i >= 0:
		q = "I+ aVF−: 0° to −90°"
	case f >= 0:
		q = "I− aVF+: +90° to +180°"
	default:
		q = "I− aVF−: −90° to −180°"
	}
	return deg(f*augScale, i), q, true
}

// axisIsoelectric is the isoelectric-lead method: the limb lead with the
// smallest net deflection (after the augmented rescaling); the axis lies
// on its perpendicular, on the side that points toward the positive leads.
// The classical reading is that perpendicular (a multiple of 30°); the
// value returned refines it with the residual of the nearly isoelectric
// lead against the perpendicular lead, which is exact for a pure dipole.
func axisIsoelectric(net map[string]float64) (value, classical float64, detail string, ok bool) {
	p := projections(net)
	if len(p) < 3 {
		return math.NaN(), math.NaN(), "needs at least three limb leads", false
	}
	iso, best := "", math.Inf(1)
	for _, l := range record.Limb6 {
		if v, ok := p[l]; ok && math.Abs(v) < best {
			iso, best = l, math.Abs(v)
		}
	}
	th := hexaxial[iso]
	// Choose the perpendicular that points toward the positive leads.
	score := func(d float64) float64 {
		var s float64
		for l, v := range p {
			s += v * math.Cos((d-hexaxial[l])*math.Pi/180)
		}
		return s
	}
	d := wrap(th + 90)
	if score(wrap(th-90)) > score(d) {
		d = wrap(th - 90)
	}
	classical = d
	pl := perpLead[iso]
	pv, okp := p[pl]
	if !okp {
		return d, d, fmt.Sprintf("%s nearly isoelectric; axis on its perpendicular %+.0f°", iso, d), true
	}
	// Components on the orthonormal pair (iso, perpendicular lead).
	pth := hexaxial[pl]
	x := p[iso]*math.Cos(th*math.Pi/180) + pv*math.Cos(pth*math.Pi/180)
	y := p[iso]*math.Sin(th*math.Pi/180) + pv*math.Sin(pth*math.Pi/180)
	value = deg(y, x)
	if math.Abs(angDiff(value, d)) > 45 {
		// The perpendicular lead disagrees with the positive leads (a noisy
		// or contradictory record): keep the classical reading.
		value = d
	}
	return value, classical, fmt.Sprintf("%s nearly isoelectric; perpendicular %+.0f° (classical), refined with %s", iso, d, pl), true
}

// Category returns the frontal QRS axis category of the AHA/ACCF/HRS
// recommendations for the standardization and interpretation of the ECG
// (Surawicz et al., 2009): "normal" −30° to +90°, "left" (left axis
// deviation) −30° to −90°, "right" (right axis deviation) +90° to +180°,
// "extreme" −90° to ±180°. A boundary value goes to the normal side
// (−30°, +90°) and to left deviation (−90°); ±180° is right deviation.
func Category(degrees float64) string {
	if math.IsNaN(degrees) {
		return "undetermined"
	}
	a := wrap(degrees)
	switch {
	case a >= -30 && a <= 90:
		return "normal"
	case a < -30 && a >= -90:
		return "left"
	case a > 90:
		return "right"
	default:
		return "extreme"
	}
}

// circSD is the circular standard deviation in degrees of angles in
// degrees, sqrt(−2 ln R) with R the mean resultant length (Mardia 1972).
func circSD(a []float64) float64 {
	if len(a) < 2 {
		return math.NaN()
	}
	var c, s float64
	for _, v := range a {
		c += math.Cos(v * math.Pi / 180)
		s += math.Sin(v * math.Pi / 180)
	}
	r := math.Min(1, math.Hypot(c, s)/float64(len(a)))
	if r <= 1e-12 {
		return 180
	}
	return math.Min(180, math.Sqrt(-2*math.Log(r))*180/math.Pi)
}
