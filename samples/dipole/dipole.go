// Package dipole makes synthetic 12-lead ECG signals from a moving cardiac
// dipole: a heart vector H(t) in three dimensions (x toward the patient's
// left, y toward the feet, z anterior), built as sums of smooth lobes for
// the P wave, the QRS loop and the T wave, projected onto the lead
// directions.
//
// Units: time in seconds, amplitudes in mV, angles in degrees with the
// hexaxial convention (0° toward lead I's positive pole, +90° toward aVF).
// The limb leads obey Einthoven's and Goldberger's relations exactly; the
// frontal direction of each wave's net area is exactly the requested axis,
// because every wave is built so (see Generate). Synthetic data only: the
// signals are for tests and demonstrations, not physiology.
package dipole

import (
	"math"
	"math/rand"

	"tracelift/record"
)

// Params describes the synthetic recording. A zero field takes its
// documented default.
type Params struct {
	HeartRateBPM float64 // default 70
	// PR is P onset to QRS onset; QT is QRS onset to T end.
	PRms, QRSms, QTms float64 // defaults 160, 90, 380
	// Frontal directions of the net wave areas, hexaxial convention.
	// A zero value takes the default (60, 50, 40); use a tiny value such
	// as 1e-9 to ask for 0° exactly.
	QRSAxisDeg, PAxisDeg, TAxisDeg float64
	// TransitionLead is the precordial position where R/S = 1 (3.5 =
	// between V3 and V4). Default 3.5; kept within [1.2, 5.8].
	TransitionLead float64
	QRSAmpMV       float64 // peak of the main QRS lobe vector, default 1.5
	DurationS      float64 // default 10
	RateHz         float64 // default 500
	NoiseMV        float64 // white noise on the heart vector (std, mV), default 0
	WanderMV       float64 // baseline wander amplitude (mV), default 0
	Seed           int64   // beat-to-beat jitter, noise and wander come from it
}

// Truth is what the generator put in, for scoring a measurement.
type Truth struct {
	QRSAxisDeg, PAxisDeg, TAxisDeg float64
	RPeaksS                        []float64 // peak of the main QRS lobe, per beat within the record
	QRSOnsetS                      []float64
	HeartRateBPM                   float64 // 60 / mean RR
	PRms, QRSms, QTms              float64
	TransitionLead                 float64
}

func (p Params) withDefaults() Params {
	def := func(v *float64, d float64) {
		if *v == 0 || math.IsNaN(*v) || math.IsInf(*v, 0) {
			*v = d
		}
	}
	def(&p.HeartRateBPM, 70)
	def(&p.PRms, 160)
	def(&p.QRSms, 90)
	def(&p.QTms, 380)
	def(&p.QRSAxisDeg, 60)
	def(&p.PAxisDeg, 50)
	def(&p.TAxisDeg, 40)
	def(&p.TransitionLead, 3.5)
	def(&p.QRSAmpMV, 1.5)
	def(&p.DurationS, 10)
	def(&p.RateHz, 500)
	p.HeartRateBPM = clamp(p.HeartRateBPM, 20, 250)
	p.PRms = clamp(p.PRms, 60, 400)
	p.QRSms = clamp(p.QRSms, 40, 200)
	p.QTms = clamp(p.QTms, p.QRSms+80, 700)
	p.TransitionLead = clamp(p.TransitionLead, 1.2, 5.8)
	p.DurationS = clamp(p.DurationS, 1, 600)
	p.RateHz = clamp(p.RateHz, 50, 10000)
	if p.NoiseMV < 0 || math.IsNaN(p.NoiseMV) {
		p.NoiseMV = 0
	}
	if p.WanderMV < 0 || math.IsNaN(p.WanderMV) {
		p.WanderMV = 0
	}
	return p
}

func clamp(v, lo, hi float64) float64 { return math.Max(lo, math.Min(hi, v)) }

// vec3 is a heart-vector direction or value: x left, y feet, z anterior.
type vec3 [3]float64

func (a vec3) add(b vec3) vec3      { return vec3{a[0] + b[0], a[1] + b[1], a[2] + b[2]} }
func (a vec3) scale(k float64) vec3 { return vec3{a[0] * k, a[1] * k, a[2] * k} }
func (a vec3) dot(b vec3) float64   { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

// lobe is a smooth bump of compact support: amp·cos²(π(t−c)/(2w)) for
// |t−c| < w, zero elsewhere; its time integral is amp·w.
type lobe struct {
	c, w float64 // centre and half-width, seconds from QRS onset
	amp  vec3
}

func (l lobe) at(t float64) vec3 {
	d := t - l.c
	if d <= -l.w || d >= l.w {
		return vec3{}
	}
	k := math.Cos(math.Pi * d / (2 * l.w))
	return l.amp.scale(k * k)
}

// beatModel is one beat's lobes, times relative to QRS onset.
type beatModel struct {
	p, qrs, t []lobe
	rPeak     float64 // time of the main QRS lobe's peak after onset
}

// frontal returns the unit frontal direction at hexaxial angle deg.
func frontal(deg float64) (float64, float64) {
	r := deg * math.Pi / 180
	return math.Cos(r), math.Sin(r)
}

func (p Params) model() beatModel {
	q := p.QRSms / 1000
	pr := p.PRms / 1000
	qt := p.QTms / 1000
	amp := p.QRSAmpMV
	var m beatModel

	// P wave: one lobe ending 30 ms before... it starts at P onset and
	// lasts min(110 ms, PR-40 ms); anterior-leaning a little.
	pdur := math.Min(0.110, pr-0.040)
	px, py := frontal(p.PAxisDeg)
	pa := 0.18 * amp / 1.5
	m.p = []lobe{{c: -pr + pdur/2, w: pdur / 2, amp: vec3{px * pa, py * pa, 0.05 * pa}}}

	// QRS loop: septal (rightward, anterior), main (toward the axis,
	// posterior), terminal (rightward-superior, posterior). Built in the
	// axis frame, then rotated about z so the net frontal area points
	// exactly at the axis.
	ax, ay := frontal(p.QRSAxisDeg)
	sx, sy := frontal(p.QRSAxisDeg + 150)
	tx, ty := frontal(p.QRSAxisDeg + 200)
	sep := lobe{c: 0.12 * q, w: 0.12 * q, amp: vec3{0.12 * amp * sx, 0.12 * amp * sy, 0.22 * amp}}
	main := lobe{c: 0.45 * q, w: 0.33 * q, amp: vec3{0.85 * amp * ax, 0.85 * amp * ay, -0.52 * amp}}
	term := lobe{c: 0.85 * q, w: 0.15 * q, amp: vec3{0.18 * amp * tx, 0.18 * amp * ty, -0.15 * amp}}
	m.qrs = []lobe{sep, main, term}
	var nx, ny float64
	for _, l := range m.qrs {
		nx += l.amp[0] * l.w
		ny += l.amp[1] * l.w
	}
	rot := p.QRSAxisDeg*math.Pi/180 - math.Atan2(ny, nx)
	c, s := math.Cos(rot), math.Sin(rot)
	for i := range m.qrs {
		a := m.qrs[i].amp
		m.qrs[i].amp = vec3{c*a[0] - s*a[1], s*a[0] + c*a[1], a[2]}
	}
	m.rPeak = main.c

	// T wave: two lobes along one direction (a slow rise and a faster
	// fall), ending exactly at QT.
	tx2, ty2 := frontal(p.TAxisDeg)
	ta := 0.38 * amp / 1.5
	tend := qt
	tw := math.Min(0.20, 0.55*(qt-q))
	dir := vec3{tx2, ty2, 0.35}
	m.t = []lobe{
		{c: tend - tw + 0.55*tw, w: 0.55 * tw, amp: dir.scale(0.55 * ta)},
		{c: tend - 0.4*tw, w: 0.4 * tw, amp: dir.scale(ta)},
	}
	return m
}

func (m beatModel) at(t float64) vec3 {
	var h vec3
	for _, set := range [][]lobe{m.p, m.qrs, m.t} {
		for _, l := range set {
			h = h.add(l.at(t))
		}
	}
	return h
}

func (m beatModel) qrsAt(t float64) vec3 {
	var h vec3
	for _, l := range m.qrs {
		h = h.add(l.at(t))
	}
	return h
}

// beats returns the QRS onset times of all beats touching [0, D),
// including partial beats at both ends, with small zero-mean RR jitter.
func (p Params) beats() (onsets []float64, rr float64) {
	rng := rand.New(rand.NewSource(p.Seed))
	rr = 60 / p.HeartRateBPM
	pr := p.PRms / 1000
	// First onset: after the first P onset at a seeded phase.
	t := pr + 0.05 + rng.Float64()*0.4*rr
	for t-rr > -p.QTms/1000 {
		t -= rr
	}
	n := int((p.DurationS-t)/rr) + 3
	dev := make([]float64, n)
	var mean float64
	for i := range dev {
		dev[i] = 0.02 * rr * rng.NormFloat64()
		mean += dev[i]
	}
	mean /= float64(n)
	for i := range dev {
		// Keep the jitter small (±4 % of RR) and zero-mean.
		dev[i] = clamp(dev[i]-mean, -0.04*rr, 0.04*rr)
	}
	for i := 0; t < p.DurationS+pr; i++ {
		onsets = append(onsets, t)
		d := 0.0
		if i < n {
			d = dev[i]
		}
		t += rr + d
	}
	return onsets, rr
}

// precordialDirs returns unit lead directions for V1..V6 in the
// horizontal plane (x, z), chosen so that the R/S ratio of the QRS loop
// falls log-linearly with distance from the transition and equals 1 at
// TransitionLead.
func (p Params) precordialDirs(m beatModel) [6]vec3 {
	q := p.QRSms / 1000
	n := int(math.Ceil(q * 4000))
	samples := make([]vec3, n+1)
	for i := range samples {
		samples[i] = m.qrsAt(q * float64(i) / float64(n))
	}
	dir := func(th float64) vec3 { return vec3{math.Cos(th), 0, math.Sin(th)} }
	ratio := func(th float64) float64 {
		d := dir(th)
		var r, s float64
		for _, h := range samples {
			v := h.dot(d)
			r = math.Max(r, v)
			s = math.Max(s, -v)
		}
		return r / math.Max(s, 1e-9)
	}
	// Horizontal direction of the main lobe (largest |amp|).
	main := m.qrs[1].amp
	phiM := math.Atan2(main[2], main[0])
	// Walk from the anti-main direction (small R/S, V1's side) to the
	// main direction through the anterior half-plane of the septal lobe:
	// parameter u in [0,1], theta = phiM + π − u·π·side.
	sep := m.qrs[0].amp
	side := 1.0
	// Pick the way round that passes closer to the septal direction.
	phiS := math.Atan2(sep[2], sep[0])
	if math.Sin(phiS-phiM) < 0 {
		side = -1
	}
	theta := func(u float64) float64 { return phiM + side*(math.Pi-u*math.Pi) }
	const c = 0.7 // log R/S change per lead
	var out [6]vec3
	for k := 0; k < 6; k++ {
		target := math.Exp(c * (float64(k+1) - p.TransitionLead))
		lo, hi := 0.0, 1.0
		if ratio(theta(lo)) >= target {
			out[k] = dir(theta(lo))
			continue
		}
		if ratio(theta(hi)) <= target {
			out[k] = dir(theta(hi))
			continue
		}
		for it := 0; it < 50; it++ {
			mid := (lo + hi) / 2
			if ratio(theta(mid)) < target {
				lo = mid
			} else {
				hi = mid
			}
		}
		out[k] = dir(theta((lo + hi) / 2))
	}
	return out
}

// Generate returns the twelve standard leads (record.Standard12) sampled
// at RateHz for DurationS, starting at time 0. Leads I and II project the
// frontal heart vector onto 0° and 60°; III, aVR, aVL and aVF follow from
// them exactly by Einthoven's and Goldberger's relations (common
// practice): III = II − I, aVR = −(I+II)/2, aVL = I − II/2, aVF = II − I/2.
// Noise and wander are added to the heart vector, so the relations stay
// exact.
func Generate(p Params) *record.Record {
	p = p.withDefaults()
	m := p.model()
	onsets, _ := p.beats()
	dirs := p.precordialDirs(m)
	n := int(math.Round(p.DurationS * p.RateHz))
	rng := rand.New(rand.NewSource(p.Seed + 7919))
	// Wander: a few slow sinusoids per axis (0.1-0.5 Hz, like breathing
	// and electrode drift).
	type sinus struct{ a, f, ph float64 }
	var wander [3][3]sinus
	for ax := 0; ax < 3; ax++ {
		for j := 0; j < 3; j++ {
			wander[ax][j] = sinus{p.WanderMV * (0.3 + 0.5*rng.Float64()) / 1.6, 0.1 + 0.4*rng.Float64(), 2 * math.Pi * rng.Float64()}
		}
	}
	sig := make([][]float64, 12)
	for i := range sig {
		sig[i] = make([]float64, n)
	}
	qt := p.QTms / 1000
	pr := p.PRms / 1000
	var prevNoise vec3
	bi := 0
	for i := 0; i < n; i++ {
		t := float64(i) / p.RateHz
		var h vec3
		for bi < len(onsets) && onsets[bi]+qt < t {
			bi++
		}
		for j := bi; j < len(onsets) && onsets[j]-pr <= t; j++ {
			h = h.add(m.at(t - onsets[j]))
		}
		if p.NoiseMV > 0 {
			// Lightly smoothed white noise (two-tap average keeps the
			// std near NoiseMV/√2·√2 after scaling).
			var w vec3
			for a := 0; a < 3; a++ {
				w[a] = p.NoiseMV * rng.NormFloat64()
			}
			h = h.add(w.add(prevNoise).scale(0.5 * math.Sqrt2))
			prevNoise = w
		}
		if p.WanderMV > 0 {
			for a := 0; a < 3; a++ {
				for _, s := range wander[a] {
					h[a] += s.a * math.Sin(2*math.Pi*s.f*t+s.ph)
				}
			}
		}
		lI := h[0]
		lII := 0.5*h[0] + math.Sqrt(3)/2*h[1]
		sig[0][i] = lI
		sig[1][i] = lII
		sig[2][i] = lII - lI
		sig[3][i] = -(lI + lII) / 2
		sig[4][i] = lI - lII/2
		sig[5][i] = lII - lI/2
		for k := 0; k < 6; k++ {
			// Precordial leads sit close to the heart: larger deflections.
			sig[6+k][i] = 1.4 * h.dot(dirs[k])
		}
	}
	rec := &record.Record{Name: "dipole"}
	rec.Provenance.Software = "tracelift samples/dipole (synthetic)"
	for i, name := range record.Standard12 {
		rec.Signals = append(rec.Signals, record.Signal{Lead: name, RateHz: p.RateHz, StartS: 0, MV: sig[i]})
	}
	return rec
}

// Truth returns what Generate(p) builds in: the frontal directions of
// the net P, QRS and T areas, the R-peak and QRS-onset times of the beats
// whose R peak lies within the record, and the intervals.
func (p Params) Truth() Truth {
	p = p.withDefaults()
	m := p.model()
	onsets, rr := p.beats()
	tr := Truth{
		QRSAxisDeg: norm180(p.QRSAxisDeg), PAxisDeg: norm180(p.PAxisDeg), TAxisDeg: norm180(p.TAxisDeg),
		PRms: p.PRms, QRSms: p.QRSms, QTms: p.QTms, TransitionLead: p.TransitionLead,
	}
	for _, o := range onsets {
		r := o + m.rPeak
		if r >= 0 && r < p.DurationS {
			tr.RPeaksS = append(tr.RPeaksS, r)
			tr.QRSOnsetS = append(tr.QRSOnsetS, o)
		}
	}
	if k := len(tr.RPeaksS); k >= 2 {
		tr.HeartRateBPM = 60 * float64(k-1) / (tr.RPeaksS[k-1] - tr.RPeaksS[0])
	} else {
		tr.HeartRateBPM = 60 / rr
	}
	return tr
}

// norm180 maps an angle to (−180, 180].
func norm180(d float64) float64 {
	d = math.Mod(d, 360)
	if d > 180 {
		d -= 360
	}
	if d <= -180 {
		d += 360
	}
	return d
}
