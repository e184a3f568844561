package dipole

import (
	"math"
	"testing"

	"tracelift/record"
)

// Einthoven's law and Goldberger's relations (common practice):
// III = II − I, aVR = −(I+II)/2, aVL = I − II/2, aVF = II − I/2.
func TestLimbLeadLaws(t *testing.T) {
	t.Parallel()
	rec := Generate(Params{NoiseMV: 0.02, WanderMV: 0.1, Seed: 3, QRSAxisDeg: -30})
	if err := rec.Validate(); err != nil {
		t.Fatal(err)
	}
	if got := rec.Leads(); len(got) != 12 {
		t.Fatalf("leads %v", got)
	}
	for i, name := range record.Standard12 {
		if rec.Signals[i].Lead != name {
			t.Fatalf("lead %d is %s, want %s", i, rec.Signals[i].Lead, name)
		}
		if len(rec.Signals[i].MV) != 5000 {
			t.Fatalf("%s has %d samples, want 5000 (10 s at 500 Hz)", name, len(rec.Signals[i].MV))
		}
	}
	I, II, III := rec.Lead("I").MV, rec.Lead("II").MV, rec.Lead("III").MV
	aVR, aVL, aVF := rec.Lead("aVR").MV, rec.Lead("aVL").MV, rec.Lead("aVF").MV
	var peak float64
	for k := range I {
		peak = math.Max(peak, math.Abs(II[k]))
		for _, c := range []struct {
			name      string
			got, want float64
		}{
			{"III", III[k], II[k] - I[k]},
			{"aVR", aVR[k], -(I[k] + II[k]) / 2},
			{"aVL", aVL[k], I[k] - II[k]/2},
			{"aVF", aVF[k], II[k] - I[k]/2},
		} {
			if math.Abs(c.got-c.want) > 1e-12 {
				t.Fatalf("sample %d: %s = %v, law gives %v", k, c.name, c.got, c.want)
			}
		}
	}
	if peak < 0.3 {
		t.Fatalf("lead II peak %v mV: signal too small to be an ECG", peak)
	}
}

// hexaxial lead angles (common practice): I 0°, II 60°, III 120°,
// aVR −150°, aVL −30°, aVF 90°; augmented leads read √3/2 of the
// projection in Einthoven's triangle, hence the 2/√3 rescaling.
var hexaxial = []struct {
	lead  string
	deg   float64
	scale float64
}{
	{"I", 0, 1}, {"II", 60, 1}, {"III", 120, 1},
	{"aVR", -150, 2 / math.Sqrt(3)}, {"aVL", -30, 2 / math.Sqrt(3)}, {"aVF", 90, 2 / math.Sqrt(3)},
}

// frontalAxis is an independent net-area axis estimate: sum each limb
// lead over the given windows, then fit the frontal vector by least
// squares on the hexaxial angles.
func frontalAxis(rec *record.Record, windows [][2]float64) float64 {
	var sxx, sxy, syy, bx, by float64
	for _, h := range hexaxial {
		s := rec.Lead(h.lead)
		var area float64
		for _, w := range windows {
			i0 := int(math.Ceil(w[0] * s.RateHz))
			i1 := int(math.Floor(w[1] * s.RateHz))
			for i := max(i0, 0); i <= i1 && i < len(s.MV); i++ {
				area += s.MV[i]
			}
		}
		area *= h.scale / s.RateHz
		c, sn := math.Cos(h.deg*math.Pi/180), math.Sin(h.deg*math.Pi/180)
		sxx += c * c
		sxy += c * sn
		syy += sn * sn
		bx += c * area
		by += sn * area
	}
	det := sxx*syy - sxy*sxy
	ax := (syy*bx - sxy*by) / det
	ay := (sxx*by - sxy*bx) / det
	return math.Atan2(ay, ax) * 180 / math.Pi
}

func angleDiff(a, b float64) float64 {
	return math.Abs(norm180(a - b))
}

func TestQRSAxisRoundTheCircle(t *testing.T) {
	t.Parallel()
	for deg := -180.0; deg < 180; deg += 15 {
		p := Params{QRSAxisDeg: deg, Seed: int64(deg) + 200, DurationS: 6}
		if deg == 0 {
			p.QRSAxisDeg = 1e-9
		}
		rec := Generate(p)
		tr := p.Truth()
		var win [][2]float64
		for _, o := range tr.QRSOnsetS {
			if o >= 0 && o+tr.QRSms/1000 < 6 {
				win = append(win, [2]float64{o, o + tr.QRSms/1000})
			}
		}
		if len(win) < 3 {
			t.Fatalf("axis %v: only %d whole beats", deg, len(win))
		}
		got := frontalAxis(rec, win)
		if d := angleDiff(got, deg); d > 0.5 {
			t.Errorf("QRS axis %v°: limb-lead net area gives %.2f° (off by %.2f°)", deg, got, d)
		}
		if d := angleDiff(tr.QRSAxisDeg, deg); d > 1e-6 {
			t.Errorf("truth axis %v for %v", tr.QRSAxisDeg, deg)
		}
	}
}

func TestPAndTAxes(t *testing.T) {
	t.Parallel()
	p := Params{PAxisDeg: 75, TAxisDeg: -20, QRSAxisDeg: 10, Seed: 9}
	rec := Generate(p)
	tr := p.Truth()
	var pw, tw [][2]float64
	for _, o := range tr.QRSOnsetS {
		pw = append(pw, [2]float64{o - tr.PRms/1000, o})
		tw = append(tw, [2]float64{o + tr.QRSms/1000, o + tr.QTms/1000})
	}
	if got := frontalAxis(rec, pw); angleDiff(got, 75) > 1 {
		t.Errorf("P axis: got %.2f want 75", got)
	}
	if got := frontalAxis(rec, tw); angleDiff(got, -20) > 1 {
		t.Errorf("T axis: got %.2f want -20", got)
	}
}

// Heart rate from R-peak times found in the generated lead II by a plain
// threshold-and-local-maximum detector, independent of the truth's list.
func TestHeartRate(t *testing.T) {
	t.Parallel()
	for _, bpm := range []float64{45, 70, 110, 160} {
		p := Params{HeartRateBPM: bpm, Seed: int64(bpm), DurationS: 20}
		rec := Generate(p)
		s := rec.Lead("II")
		var peak float64
		for _, v := range s.MV {
			peak = math.Max(peak, v)
		}
		var rs []float64
		refractory := int(0.25 * s.RateHz)
		last := -refractory
		for i := 1; i+1 < len(s.MV); i++ {
			v := s.MV[i]
			if v > 0.6*peak && v >= s.MV[i-1] && v > s.MV[i+1] && i-last > refractory {
				rs = append(rs, float64(i)/s.RateHz)
				last = i
			}
		}
		if len(rs) < 5 {
			t.Fatalf("%v bpm: found %d beats", bpm, len(rs))
		}
		hr := 60 * float64(len(rs)-1) / (rs[len(rs)-1] - rs[0])
		if math.Abs(hr-bpm)/bpm > 0.03 {
			t.Errorf("requested %v bpm, detected %.1f", bpm, hr)
		}
		tr := p.Truth()
		if math.Abs(tr.HeartRateBPM-hr)/hr > 0.01 {
			t.Errorf("truth says %.2f bpm, detector %.2f", tr.HeartRateBPM, hr)
		}
		if len(tr.RPeaksS) != len(rs) {
			t.Errorf("%v bpm: truth lists %d R peaks, detector found %d", bpm, len(tr.RPeaksS), len(rs))
			continue
		}
		for i := range rs {
			if math.Abs(rs[i]-tr.RPeaksS[i]) > 0.02 {
				t.Errorf("beat %d: detected R at %.3f s, truth %.3f s", i, rs[i], tr.RPeaksS[i])
			}
		}
	}
}

// The R/S ratio (R = largest positive, S = largest negative deflection
// of the QRS, common practice) crosses 1 at TransitionLead.
func TestPrecordialTransition(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct{ axis, trans float64 }{
		{60, 3.5}, {60, 2.5}, {60, 4.5}, {-30, 3}, {100, 5}, {150, 2}, {0.001, 4},
	} {
		p := Params{QRSAxisDeg: tc.axis, TransitionLead: tc.trans, Seed: 4}
		rec := Generate(p)
		tr := p.Truth()
		o := tr.QRSOnsetS[2]
		var ratio [6]float64
		for k, name := range record.Precordial {
			s := rec.Lead(name)
			var r, sd float64
			for i := int(o * s.RateHz); float64(i)/s.RateHz <= o+tr.QRSms/1000; i++ {
				r = math.Max(r, s.MV[i])
				sd = math.Max(sd, -s.MV[i])
			}
			ratio[k] = r / sd
		}
		cross := math.NaN()
		for k := 0; k < 5; k++ {
			if ratio[k] < 1 && ratio[k+1] >= 1 {
				cross = float64(k+1) + (1-ratio[k])/(ratio[k+1]-ratio[k])
				break
			}
		}
		if math.IsNaN(cross) || math.Abs(cross-tc.trans) > 0.25 {
			t.Errorf("axis %v transition %v: R/S %v crosses 1 at %v", tc.axis, tc.trans, ratio, cross)
		}
	}
}

func TestRepeatableFromSeed(t *testing.T) {
	t.Parallel()
	a := Generate(Params{Seed: 5, NoiseMV: 0.01})
	b := Generate(Params{Seed: 5, NoiseMV: 0.01})
	c := Generate(Params{Seed: 6, NoiseMV: 0.01})
	same, diff := true, false
	for i := range a.Signals[0].MV {
		if a.Signals[0].MV[i] != b.Signals[0].MV[i] {
			same = false
		}
		if a.Signals[0].MV[i] != c.Signals[0].MV[i] {
			diff = true
		}
	}
	if !same || !diff {
		t.Errorf("same seed equal: %v, other seed differs: %v", same, diff)
	}
}
