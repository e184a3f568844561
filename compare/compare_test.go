package compare

import (
	"math"
	"slices"
	"sort"
	"testing"

	"tracelift/axis"
	"tracelift/record"
)

// PTB s0010_re (PTB Diagnostic ECG Database, PhysioNet) is one recording
// of one person at rest: its first 10 s and the 10 s after are two
// tracings of an unchanged heart, so nothing may be raised and every
// difference must sit within its uncertainty (the check).
func TestPTBLaterWindowRaisesNothing(t *testing.T) {
	t.Parallel()
	rec := ptb(t)
	a, b := window(rec, 0, 10), window(rec, 10, 20)
	r, err := Compare(Side{Label: "0-10 s", Record: a}, Side{Label: "10-20 s", Record: b}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("\n%s", table(r, testing.Verbose()))
	if k := raisedKeys(r); len(k) > 0 {
		t.Errorf("raised %v, want nothing", k)
	}
	// With 90 % intervals about one item in ten may fall outside by
	// chance; many more means the intervals are too narrow.
	beyond, n := 0, 0
	for _, c := range r.Changes {
		if c.Delta.OK() {
			n++
			if c.Beyond {
				beyond++
				t.Logf("beyond its uncertainty: %s", c.Message)
			}
		}
	}
	t.Logf("%d of %d items beyond their 90 %% uncertainty", beyond, n)
	if beyond*100 > 15*n {
		t.Errorf("%d of %d items beyond their 90 %% uncertainty, want at most 15 %%", beyond, n)
	}
	if r.Exchange != nil {
		t.Errorf("exchange %s found between two windows of one recording", r.Exchange.Name)
	}
}

// rotateFrontal turns the frontal heart vector of rec's limb leads by deg
// (hexaxial, clockwise positive) using Einthoven's and Goldberger's
// relations (common practice): x = I, y = (2·II − I)/√3; then I = x,
// II = x/2 + (√3/2)·y, III = II − I, aVR = −(I+II)/2, aVL = I − II/2,
// aVF = II − I/2. The precordial leads are left as they are.
func rotateFrontal(rec *record.Record, deg float64) *record.Record {
	out := rec.Clone()
	c, s := math.Cos(deg*math.Pi/180), math.Sin(deg*math.Pi/180)
	i1, i2 := rec.Lead("I"), rec.Lead("II")
	for k := range i1.MV {
		x := i1.MV[k]
		y := (2*i2.MV[k] - i1.MV[k]) / math.Sqrt(3)
		xr, yr := c*x-s*y, s*x+c*y
		I := xr
		II := xr/2 + math.Sqrt(3)/2*yr
		out.Lead("I").MV[k] = I
		out.Lead("II").MV[k] = II
		out.Lead("III").MV[k] = II - I
		out.Lead("aVR").MV[k] = -(I + II) / 2
		out.Lead("aVL").MV[k] = I - II/2
		out.Lead("aVF").MV[k] = II - I/2
	}
	return out
}

// addST raises the ST segment of the named leads by mv in every beat f
// found: from the J point (QRS offset) it ramps up over 20 ms, stays level
// to halfway to the T end and falls back to 0 at the T end, the shape of
// an ST elevation merging into T.
func addST(rec *record.Record, f *axis.Findings, mv float64, leads ...string) *record.Record {
	out := rec.Clone()
	fd := f.Fiducials
	for _, l := range leads {
		s := out.Lead(l)
		for _, b := range f.Beats {
			j := b.TS + float64(fd.QRSOff)/1000
			e := b.TS + float64(fd.TEnd)/1000
			mid := (j + e) / 2
			for k := range s.MV {
				t := s.StartS + float64(k)/s.RateHz
				var v float64
				switch {
				case t < j || t >= e:
					continue
				case t < j+0.020:
					v = mv * (t - j) / 0.020
				case t < mid:
					v = mv
				default:
					v = mv * (e - t) / (e - mid)
				}
				s.MV[k] += v
			}
		}
	}
	return out
}

// lengthenQT stretches every beat's ST-T so that its T end comes dms
// later: time from the J point to the T end is stretched, and from the T
// end to the next P onset squeezed, by piecewise linear warping of all
// leads together.
func lengthenQT(rec *record.Record, f *axis.Findings, dms float64) *record.Record {
	out := rec.Clone()
	fd := f.Fiducials
	d := dms / 1000
	// Knots: (new time, old time), starting and ending at identity.
	type knot struct{ tn, to float64 }
	var knots []knot
	ts := make([]float64, 0, len(f.Beats))
	for _, b := range f.Beats {
		ts = append(ts, b.TS)
	}
	sort.Float64s(ts)
	for i, t := range ts {
		j := t + float64(fd.QRSOff)/1000
		e := t + float64(fd.TEnd)/1000
		if i+1 >= len(ts) {
			break
		}
		n := ts[i+1] + float64(fd.POn)/1000
		if n-e < d+0.05 {
			continue
		}
		knots = append(knots, knot{j, j}, knot{e + d, e}, knot{n, n})
	}
	warp := func(tn float64) float64 {
		for i := 1; i < len(knots); i++ {
			a, b := knots[i-1], knots[i]
			if tn >= a.tn && tn < b.tn {
				return a.to + (tn-a.tn)*(b.to-a.to)/(b.tn-a.tn)
			}
		}
		return tn
	}
	for si := range out.Signals {
		src := &rec.Signals[si]
		dst := &out.Signals[si]
		for k := range dst.MV {
			to := warp(src.StartS + float64(k)/src.RateHz)
			x := (to - src.StartS) * src.RateHz
			i := int(math.Floor(x))
			if i >= 0 && i+1 < len(src.MV) {
				fr := x - float64(i)
				dst.MV[k] = src.MV[i]*(1-fr) + src.MV[i+1]*fr
			}
		}
	}
	return out
}

// armsReversed records rec as with the left and right arm electrodes
// exchanged, from the electrode potentials' definitions (common
// practice): I = LA − RA becomes −I, II = LL − RA becomes III, III
// becomes II, aVR and aVL trade places, aVF stays.
func armsReversed(rec *record.Record) *record.Record {
	out := rec.Clone()
	set := func(dst, src string, sign float64) {
		s := rec.Lead(src)
		d := out.Lead(dst)
		for k := range d.MV {
			d.MV[k] = sign * s.MV[k]
		}
	}
	set("I", "I", -1)
	set("II", "III", 1)
	set("III", "II", 1)
	set("aVR", "aVL", 1)
	set("aVL", "aVR", 1)
	return out
}

// swapLabels exchanges two leads' names.
func swapLabels(rec *record.Record, a, b string) *record.Record {
	out := rec.Clone()
	sa, sb := out.Lead(a), out.Lead(b)
	sa.Lead, sb.Lead = b, a
	return out
}

// The injected changes on PTB s0010_re's first 10 s, each
// compared with the record as it was: exactly the injected change is
// raised, nothing else.
func TestInjectedChanges(t *testing.T) {
	t.Parallel()
	base := window(ptb(t), 0, 10)
	f := measure(t, base)
	axisItems := []string{ItemQRSAxis, ItemPAxis, ItemTAxis}
	cases := []struct {
		name string
		b    *record.Record
		// want lists the raised changes that must be there; allowed the
		// ones that may be there besides.
		want, allowed []string
		exchange      string
	}{
		{name: "axis turned 40°", b: rotateFrontal(base, 40), want: []string{ItemQRSAxis}, allowed: axisItems},
		{name: "ST +0.15 mV in V2 and V3", b: addST(base, f, 0.15, "V2", "V3"), want: []string{"V2 " + ItemST, "V3 " + ItemST}},
		{name: "QT +80 ms", b: lengthenQT(base, f, 80), want: []string{ItemQT, ItemQTc}},
		{name: "I and aVL swapped", b: swapLabels(base, "I", "aVL"), exchange: "swapped_I_aVL"},
		{name: "arm electrodes reversed", b: armsReversed(base), exchange: "la_ra_reversed"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			r, err := Compare(Side{Label: "as recorded", Record: base, Findings: f}, Side{Label: tc.name, Record: tc.b}, Options{})
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("\n%s", table(r, testing.Verbose()))
			got := raisedKeys(r)
			for _, w := range tc.want {
				if !slices.Contains(got, w) {
					t.Errorf("%s not raised (raised: %v)", w, got)
				}
			}
			for _, g := range got {
				if !slices.Contains(tc.want, g) && !slices.Contains(tc.allowed, g) {
					t.Errorf("%s raised, not injected", g)
				}
			}
			switch {
			case tc.exchange == "" && r.Exchange != nil:
				t.Errorf("exchange %s reported, none injected", r.Exchange.Name)
			case tc.exchange != "" && (r.Exchange == nil || r.Exchange.Name != tc.exchange):
				t.Errorf("exchange %+v, want %s", r.Exchange, tc.exchange)
			}
		})
	}
}

// A tracing printed or read at twice the gain (20 mm/mV taken for 10,
// say) is every lead times 2: the common factor is reported and the
// amplitude changes it accounts for are not raised.
func TestGainMismatchExplained(t *testing.T) {
	t.Parallel()
	base := window(ptb(t), 0, 10)
	b := base.Clone()
	for i := range b.Signals {
		for k := range b.Signals[i].MV {
			b.Signals[i].MV[k] *= 2
		}
	}
	r, err := Compare(Side{Label: "10 mm/mV", Record: base}, Side{Label: "20 mm/mV", Record: b}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("\n%s", table(r, testing.Verbose()))
	if !r.GainMismatch || math.Abs(float64(r.GainFactor)-2) > 0.05 {
		t.Errorf("gain factor %.3f (mismatch %v), want 2", float64(r.GainFactor), r.GainMismatch)
	}
	if k := raisedKeys(r); len(k) > 0 {
		t.Errorf("raised %v, want nothing beyond the gain", k)
	}
}
