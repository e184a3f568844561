package compare

import "math"

// z90 turns a standard deviation into the half-width of a two-sided 90 %
// interval of a normal variable (1.645, any statistics table).
const z90 = 1.6449

// medianSE is the standard error of a median of n normal samples in units
// of σ/√n, √(π/2) ≈ 1.2533 (large-sample result, any statistics text).
const medianSE = 1.2533

// fewBeatsMV is the half-width given to an amplitude when a lead holds
// fewer than three beats, so that its spread cannot be estimated (this
// package's allowance: about the beat-to-beat spread of ST and T seen on
// the PTB record s0010_re, doubled).
const fewBeatsMV = 0.05

// UncertaintyFunc returns the half-width of a 90 % interval of one side's
// value of item (in lead; "" for a global item). value is the side's
// value; spread90 is the half-width that the side's own beats give (the
// spread between its beats, or for intervals and axes the measurement
// engine's standard deviation scaled to 90 %). It lets a better estimate,
// one that knows the digitization's own error, replace the default.
type UncertaintyFunc func(s *Side, item, lead string, value, spread90 float64) float64

// DefaultUncertainty combines the beats' spread with DigitizationTerm in
// quadrature (the two taken as independent).
func DefaultUncertainty(s *Side, item, lead string, value, spread90 float64) float64 {
	d := DigitizationTerm(s, item, lead, value)
	if math.IsNaN(spread90) {
		spread90 = 0
	}
	return math.Hypot(spread90, d)
}

// DigitizationTerm is the half-width of a 90 % interval that tracing a
// picture adds to a value, zero for a record read from a file. q is the
// lead's digitization confidence (the mean over the leads for a global
// item; 0.5 when unknown). The figures are this package's allowances, to
// be replaced when the measurement engine reports intervals that include
// the digitization:
//   - amplitudes: 0.03 mV + 5 % of the value + 0.1 mV·(1−q). A clean
//     300-dpi scan is traced at a median SNR of about 25 dB (the bench
//     table), an error of about 6 % of a lead's RMS, some 0.015 mV RMS on a
//     lead of 0.25 mV RMS, or 0.025 mV at 90 %; the scale is found within
//     1.3 % (p95, calib's sweep on phone photos) and the pen's width rounds
//     the peaks, hence the share of the value.
//   - times (PR, QRS, QT, QTc, Q duration): 6 ms + 10 ms·(1−q), three
//     samples at 500 Hz, about a pixel and a half at 25 mm/s and 300 dpi,
//     plus up to 10 ms for a poor trace, as the engine allows for its own
//     interval uncertainty.
//   - axes: the angle by which the amplitude term above (without the
//     share of the value, which a common scale leaves the angle alone),
//     integrated over the wave's span, turns the wave's net frontal
//     vector: atan(a·d/|V|) with a = 0.03 mV + 0.1 mV·(1−q), d the span in
//     ms and |V| the side's own net vector in mV·ms (least squares over its
//     limb leads), at least 3°. A small net vector (an axis near an
//     isoelectric lead, a flat P) is read with a wide interval: on a 6x2
//     phone photo of PTB s0010_re, whose net QRS vector is small, the QRS
//     axis came out 30° off.
//   - heart rate: 1 bpm (the time base's scale error at about 70 /min).
//   - transition: 0.3 positions.
func DigitizationTerm(s *Side, item, lead string, value float64) float64 {
	if s == nil || !s.Digitized {
		return 0
	}
	q := s.quality(lead)
	switch item {
	case ItemQ, ItemR, ItemS, ItemT, ItemST, itemNeg:
		v := math.Abs(value)
		if math.IsNaN(v) {
			v = 0
		}
		return 0.03 + 0.05*v + 0.10*(1-q)
	case ItemPR, ItemQRS, ItemQT, ItemQTc, ItemQDur:
		return 6 + 10*(1-q)
	case ItemQRSAxis, ItemPAxis, ItemTAxis:
		v, span := netVector(s.Findings, item)
		a := 0.03 + 0.10*(1-q)
		if !(v > 0) || !(span > 0) {
			return 45
		}
		return math.Max(3, math.Atan2(a*span, v)*180/math.Pi)
	case ItemRate:
		return 1
	case ItemTransition:
		return 0.3
	}
	return 0
}

// quality returns the digitization confidence of lead, or the mean over
// the leads for "" (0.5 when nothing is known).
func (s *Side) quality(lead string) float64 {
	clamp := func(q float64) float64 {
		if math.IsNaN(q) {
			return 0
		}
		return math.Max(0, math.Min(1, q))
	}
	if lead != "" {
		if q, ok := s.Quality[lead]; ok {
			return clamp(q)
		}
		return 0.5
	}
	if len(s.Quality) == 0 {
		return 0.5
	}
	var sum float64
	for _, q := range s.Quality {
		sum += clamp(q)
	}
	return sum / float64(len(s.Quality))
}
