package compare

import (
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"

	"tracelift/axis"
	"tracelift/record"
)

// comparer builds the list of changes.
type comparer struct {
	a, b *Side
	opt  Options
	res  *Result
	// per-lead values of each side, kept for the explanations.
	vals [2]map[string]waveSet
	// blurred lists each side's leads whose representative beat is a blur.
	blurred [2][]string
}

// item is one side's value with its 90 % half-width.
type item struct{ v, u float64 }

func (c *comparer) side(i int) *Side {
	if i == 0 {
		return c.a
	}
	return c.b
}

// value returns side i's value of a global item with its uncertainty.
func (c *comparer) value(i int, name string) item {
	s := c.side(i)
	f := s.Findings
	iv := f.IntervalsMS
	v, sd := math.NaN(), math.NaN()
	switch name {
	case ItemRate:
		v = float64(f.HeartRateBPM)
		if n := len(f.Beats) - 1; n > 0 && f.HeartRateSD.OK() {
			sd = float64(f.HeartRateSD) / math.Sqrt(float64(n))
		}
	case ItemPR:
		v, sd = float64(iv.PR), float64(iv.PRSD)
	case ItemQRS:
		v, sd = float64(iv.QRS), float64(iv.QRSSD)
	case ItemQT:
		v, sd = float64(iv.QT), float64(iv.QTSD)
	case ItemQTc:
		v, sd = float64(iv.QTcBazett), float64(iv.QTcSD)
	case ItemQRSAxis:
		v, sd = float64(f.Axis.QRSDeg), float64(f.Axis.QRSDegSD)
	case ItemPAxis:
		v, sd = float64(f.Axis.PDeg), float64(f.Axis.PDegSD)
	case ItemTAxis:
		v, sd = float64(f.Axis.TDeg), float64(f.Axis.TDegSD)
	case ItemTransition:
		// The engine reports no spread for the transition: it is found
		// here by placing the transition again with every precordial R
		// and S moved to the ends of their intervals, both ways (R up and
		// S shallower, then the reverse); a lead whose R and S are both
		// small can move it by several positions.
		v = float64(f.TransitionAt)
		sd = c.transitionSpread(i, v) / z90
	}
	if !axis.Num(v).OK() {
		return item{math.NaN(), math.NaN()}
	}
	spread := math.NaN()
	if axis.Num(sd).OK() {
		spread = z90 * sd
	}
	u := c.opt.Uncertainty(s, name, "", v, spread)
	if name == ItemQRSAxis || name == ItemPAxis || name == ItemTAxis {
		u = math.Min(180, math.Hypot(u, c.clockTerm(f, name)))
	}
	return item{v, u}
}

// clockTerm is how far an axis of f turns when its wave's window is moved
// by half the spread of the leads' shifts (Result.ClockSpreadMS) either
// way: a column placed that far off the others in time reads its areas
// over the wrong stretch. At most 180°.
func (c *comparer) clockTerm(f *axis.Findings, name string) float64 {
	lag := int(math.Round(c.res.ClockSpreadMS / 2 / gridMS))
	if lag == 0 {
		return 0
	}
	_, d0, _ := netVectorAt(f, name, 0)
	worst := 0.0
	for _, l := range []int{-lag, lag} {
		m, d, _ := netVectorAt(f, name, l)
		if m == 0 {
			return 45
		}
		worst = math.Max(worst, math.Abs(math.Mod(d-d0+540, 360)-180))
	}
	return worst
}

// transitionSpread returns how far side i's transition moves when its
// precordial R and S are taken at the ends of their 90 % intervals (5
// positions when it can then no longer be placed).
func (c *comparer) transitionSpread(i int, pos float64) float64 {
	r, s := make([]float64, 6), make([]float64, 6)
	ur, us := make([]float64, 6), make([]float64, 6)
	for k, l := range record.Precordial {
		r[k], s[k] = math.NaN(), math.NaN()
		if x, _ := template(c.side(i).Findings, l); x == nil {
			continue
		}
		w, u, _ := c.leadValues(i, l)
		r[k], s[k], ur[k], us[k] = w.r, w.s, u[ItemR], u[ItemS]
	}
	worst := 0.0
	for _, sign := range []float64{1, -1} {
		r2, s2 := make([]float64, 6), make([]float64, 6)
		for k := range r {
			r2[k] = r[k] + sign*ur[k]
			s2[k] = math.Min(0, s[k]+sign*us[k])
		}
		p := transitionAt(r2, s2)
		if math.IsNaN(p) {
			return 5
		}
		worst = math.Max(worst, math.Abs(p-pos))
	}
	return worst
}

// change fills a Change from the two items; angular items differ on the
// circle.
func change(name, lead, unit string, a, b item) Change {
	ch := Change{Item: name, Lead: lead, Unit: unit, Before: axis.Num(a.v), After: axis.Num(b.v),
		UBefore: axis.Num(a.u), UAfter: axis.Num(b.u), Delta: axis.NaN(), U: axis.NaN()}
	if math.IsNaN(a.v) || math.IsNaN(b.v) {
		return ch
	}
	d := b.v - a.v
	if unit == "deg" {
		d = math.Mod(d+540, 360) - 180
	}
	ch.Delta = axis.Num(d)
	u := math.Hypot(nz(a.u), nz(b.u))
	ch.U = axis.Num(u)
	ch.Beyond = math.Abs(d) > u
	return ch
}

func nz(v float64) float64 {
	if math.IsNaN(v) {
		return 0
	}
	return v
}

var globalUnits = map[string]string{
	ItemRate: "bpm", ItemPR: "ms", ItemQRS: "ms", ItemQT: "ms", ItemQTc: "ms",
	ItemQRSAxis: "deg", ItemPAxis: "deg", ItemTAxis: "deg", ItemTransition: "positions",
}

var itemNames = map[string]string{
	ItemRate: "heart rate", ItemPR: "PR", ItemQRS: "QRS duration", ItemQT: "QT", ItemQTc: "QTc (Bazett)",
	ItemQRSAxis: "QRS axis", ItemPAxis: "P axis", ItemTAxis: "T axis", ItemTransition: "transition",
	ItemQ: "Q", ItemQDur: "Q duration", ItemR: "R", ItemS: "S", ItemST: "ST at J+60 ms", ItemT: "T", ItemRhythm: "rhythm",
}

func (c *comparer) global() {
	fa, fb := c.a.Findings, c.b.Findings
	rh := Change{Item: ItemRhythm, Unit: "", Before: axis.NaN(), After: axis.NaN(), Delta: axis.NaN(),
		UBefore: axis.NaN(), UAfter: axis.NaN(), U: axis.NaN(), Threshold: Thresholds[ItemRhythm].Rule}
	known := func(s string) bool { return s == "regular" || s == "irregular" }
	rh.Message = fmt.Sprintf("rhythm %s, was %s", fb.Rhythm, fa.Rhythm)
	if known(fa.Rhythm) && known(fb.Rhythm) && fa.Rhythm != fb.Rhythm {
		rh.Beyond, rh.Raised, rh.Kind = true, true, KindRhythm
	}
	c.res.Changes = append(c.res.Changes, rh)

	for _, name := range []string{ItemRate, ItemPR, ItemQRS, ItemQT, ItemQTc, ItemQRSAxis, ItemPAxis, ItemTAxis, ItemTransition} {
		ch := change(name, "", globalUnits[name], c.value(0, name), c.value(1, name))
		th := Thresholds[name]
		ch.Threshold = th.Rule
		d := float64(ch.Delta)
		ch.Message = describe(ch)
		if ch.Beyond {
			switch name {
			case ItemQT, ItemQTc:
				ch.Raised = d >= th.Value
				ch.Kind = KindLonger
			case ItemPR, ItemQRS:
				ch.Raised = math.Abs(d) >= th.Value
				ch.Kind = KindLonger
				if d < 0 {
					ch.Kind = KindShorter
				}
				lim := 200.0
				if name == ItemQRS {
					lim = 120
				}
				if (float64(ch.Before) < lim) != (float64(ch.After) < lim) {
					ch.Message += fmt.Sprintf("; crosses %.0f ms", lim)
				}
			case ItemRate:
				ch.Raised = math.Abs(d) >= th.Value
				ch.Kind = KindFaster
				if d < 0 {
					ch.Kind = KindSlower
				}
			case ItemQRSAxis, ItemPAxis, ItemTAxis:
				ch.Raised = math.Abs(d) >= th.Value
				ch.Kind = KindAxisShift
			case ItemTransition:
				ch.Raised = math.Abs(d) >= th.Value
				ch.Kind = KindTransition
			}
			if !ch.Raised {
				ch.Kind = ""
			}
		}
		c.res.Changes = append(c.res.Changes, ch)
	}
}

// describe writes a change in words.
func describe(ch Change) string {
	name := itemNames[ch.Item]
	if ch.Lead != "" {
		name = ch.Lead + " " + name
	}
	if !ch.Delta.OK() {
		return name + ": not measured on both tracings"
	}
	prec := 0
	if ch.Unit == "mV" {
		prec = 2
	}
	if ch.Unit == "positions" {
		prec = 1
	}
	verdict := "within the uncertainty"
	if ch.Beyond {
		verdict = "beyond the uncertainty"
	}
	return fmt.Sprintf("%s %.*f → %.*f %s (%+.*f ± %.*f, %s)", name, prec, float64(ch.Before), prec, float64(ch.After), ch.Unit,
		prec, float64(ch.Delta), prec, float64(ch.U), verdict)
}

// leadValues measures side i's representative beat of lead with its
// uncertainty per item, and the beats' values for the spread.
//
// coherence is the representative beat's QRS peak to peak over the median
// of its beats' own: near 1 when the beats were lined up before they were
// averaged, small when they were not (beats found in the wrong places, a
// trace lost), so that the representative beat is a blur.
func (c *comparer) leadValues(i int, lead string) (w waveSet, u map[string]float64, coherence float64) {
	s := c.side(i)
	f := s.Findings
	x, r0 := template(f, lead)
	w = nanWaves()
	if x != nil {
		if fd, ok := templateFid(f, r0); ok {
			w = measureWaves(x, fd)
		}
	}
	// The engine's own amplitudes, where it gives them, are the values
	// shown (they are what its summary prints); the Q duration is ours.
	if lm := f.Lead(lead); lm != nil {
		for _, p := range []struct {
			dst *float64
			v   axis.Num
		}{{&w.q, lm.Q}, {&w.r, lm.R}, {&w.s, lm.S}, {&w.st, lm.STJ60}, {&w.t, lm.T}} {
			if p.v.OK() {
				*p.dst = float64(p.v)
			}
		}
	}
	u = map[string]float64{}
	var beats []waveSet
	if sig := s.Record.Lead(lead); sig != nil {
		beats = beatWaves(f, sig)
	}
	coherence = math.NaN()
	if len(beats) > 0 {
		pp := make([]float64, 0, len(beats))
		for _, b := range beats {
			pp = append(pp, b.r-b.neg)
		}
		sort.Float64s(pp)
		if m := pp[len(pp)/2]; m > 0 {
			coherence = (w.r - w.neg) / m
		}
	}
	for _, it := range append(leadItems, itemNeg) {
		sp := spread90(beats, it)
		if math.IsNaN(sp) {
			sp = fewBeatsMV
			if it == ItemQDur {
				sp = 10 // ms, this package's allowance for two beats or fewer
			}
		}
		// Floors: one grid step for a duration, 0.01 mV (a tenth of a
		// millimetre at 10 mm/mV, finer than paper is read) for an
		// amplitude; a median over a few beats can agree more closely
		// than two recordings do (this package's floors).
		if it == ItemQDur {
			sp = math.Max(sp, gridMS)
		} else {
			sp = math.Max(sp, 0.01)
		}
		u[it] = c.opt.Uncertainty(s, it, lead, w.get(it), sp)
	}
	return w, u, coherence
}

// lowConfidence reports whether side i read lead from a picture with a
// confidence under 0.5 (this package's choice: the digitizer's own
// warning level for a lead it doubts).
func (c *comparer) lowConfidence(i int, lead string) bool {
	s := c.side(i)
	return s.Digitized && s.quality(lead) < 0.5
}

// blurredBelow is the coherence under which a lead's representative beat
// is taken as a blur of misplaced beats: half the beats' own size (this
// package's choice; two readings of one record gave 0.8 to 1.1).
const blurredBelow = 0.5

func (c *comparer) leads() {
	c.vals = [2]map[string]waveSet{{}, {}}
	for _, p := range c.res.Beats {
		l := p.Lead
		wa, ua, ca := c.leadValues(0, l)
		wb, ub, cb := c.leadValues(1, l)
		c.vals[0][l], c.vals[1][l] = wa, wb
		for i, co := range []float64{ca, cb} {
			if co < blurredBelow {
				c.blurred[i] = append(c.blurred[i], l)
			}
		}
		for _, it := range leadItems {
			unit := "mV"
			if it == ItemQDur {
				unit = "ms"
			}
			ch := change(it, l, unit, item{wa.get(it), ua[it]}, item{wb.get(it), ub[it]})
			ch.Message = describe(ch)
			if th, ok := Thresholds[it]; ok {
				ch.Threshold = th.Rule
			}
			c.judgeLead(&ch, wa, wb, math.Hypot(ua[itemNeg], ub[itemNeg]), math.Hypot(ua[ItemQDur], ub[ItemQDur]))
			switch {
			case ch.Raised && (ca < blurredBelow || cb < blurredBelow):
				ch.Raised, ch.ExplainedBy = false, "blurred_beat"
				ch.Message += "; not raised: a representative beat of this lead is a blur of beats that do not line up"
			case ch.Raised && (c.lowConfidence(0, l) || c.lowConfidence(1, l)):
				ch.Raised, ch.ExplainedBy = false, "low_confidence"
				ch.Message += "; not raised: the digitizer is unsure of this lead's trace; check it by hand"
			}
			c.res.Changes = append(c.res.Changes, ch)
		}
	}
	// Axes rest on the limb leads: where a side's I, II and III break
	// Einthoven's law (II = I + III) where they were recorded together,
	// its layout or lead order was misread, and no axis shift is raised.
	for i, sd := range []*Side{c.a, c.b} {
		if sd == nil || sd.Record == nil {
			continue
		}
		rel, ok := einthovenMisfit(sd.Record)
		if !ok || rel <= einthovenBroken {
			continue
		}
		side := "A"
		if i == 1 {
			side = "B"
		}
		c.res.Notes = append(c.res.Notes, fmt.Sprintf("%s's leads I, II and III break Einthoven's law (residual %.0f %% of the limb leads' size): the layout or the lead order was probably misread; axis shifts are listed, not raised", side, 100*rel))
		for k := range c.res.Changes {
			ch := &c.res.Changes[k]
			if ch.Raised && (ch.Item == ItemQRSAxis || ch.Item == ItemPAxis || ch.Item == ItemTAxis) {
				ch.Raised, ch.ExplainedBy = false, "lead_law"
				ch.Message += "; not raised: the limb leads break Einthoven's law on " + side
			}
		}
	}
	// Axes rest on the limb leads' beats: with three or more of them
	// blurred on a side, an axis shift is not raised either.
	for i, names := range c.blurred {
		if len(names) == 0 {
			continue
		}
		side := "A"
		if i == 1 {
			side = "B"
		}
		c.res.Notes = append(c.res.Notes, fmt.Sprintf("%s's representative beats of %s are blurs (its beats did not line up: found in the wrong places, or the trace was lost); their changes are listed, not raised; check the tracing", side, strings.Join(names, ", ")))
		limb := 0
		for _, l := range names {
			if slices.Contains(record.Limb6, l) {
				limb++
			}
		}
		if limb < 3 {
			continue
		}
		for k := range c.res.Changes {
			ch := &c.res.Changes[k]
			if ch.Raised && (ch.Item == ItemQRSAxis || ch.Item == ItemPAxis || ch.Item == ItemTAxis) {
				ch.Raised, ch.ExplainedBy = false, "blurred_beat"
				ch.Message += "; not raised: the limb leads' beats are blurs on " + side
			}
		}
	}
}

// judgeLead decides whether a per-lead change is raised.
// uNeg and uQDur are the combined half-widths of the QRS's deepest point
// and of the Q duration.
func (c *comparer) judgeLead(ch *Change, wa, wb waveSet, uNeg, uQDur float64) {
	if !ch.Beyond {
		return
	}
	d := float64(ch.Delta)
	l := ch.Lead
	switch ch.Item {
	case ItemST:
		if math.Abs(d) >= Thresholds[ItemST].Value {
			ch.Raised = true
			ch.Kind = KindSTUp
			if d < 0 {
				ch.Kind = KindSTDown
			}
		}
	case ItemQ:
		if l == record.AVR {
			return
		}
		isQ := func(w waveSet) bool {
			return w.q <= -Thresholds[ItemQ].Value && w.qdur >= qMinMS(l)
		}
		if isQ(wb) && !isQ(wa) && d < 0 && wb.qdur-wa.qdur > uQDur {
			ch.Raised, ch.Kind = true, KindNewQ
			ch.Message += fmt.Sprintf("; a Q wave %.2f mV deep and %.0f ms long is new", -wb.q, wb.qdur)
		}
	case ItemT:
		if l == record.AVR {
			return
		}
		switch pa, pb := wa.tPolarity(), wb.tPolarity(); {
		case pa == 1 && pb == -1:
			ch.Raised, ch.Kind = true, KindNewTInversion
		case pa == -1 && pb == 1:
			ch.Raised, ch.Kind = true, KindTUpright
		}
	case ItemR, ItemS:
		a, b := math.Abs(float64(ch.Before)), math.Abs(float64(ch.After))
		big := math.Abs(d) >= Thresholds[ch.Item].Value && math.Abs(d) >= 0.25*math.Max(a, b)
		// An S whose depth moved while the QRS's deepest point did not is
		// the same wave read as Q on one side (a small R moved).
		if ch.Item == ItemS && !(math.Abs(wb.neg-wa.neg) > uNeg) {
			big = false
		}
		if big {
			ch.Raised, ch.Kind = true, KindAmplitude
		}
	}
}

// explain sets aside the raised per-lead changes that a recording
// difference accounts for: a limb lead that follows a raised frontal axis
// shift (its value within the uncertainty of A's beat turned by that
// shift), or any lead whose value is A's times a common gain factor.
func (c *comparer) explain(beatsA map[string][]float64) {
	shift := map[string]float64{}
	for _, ch := range c.res.Changes {
		if ch.Raised && (ch.Item == ItemQRSAxis || ch.Item == ItemTAxis) {
			shift[ch.Item] = float64(ch.Delta)
		}
	}
	predicted := map[string]map[string]waveSet{}
	fa := c.a.Findings
	for ax, deg := range shift {
		rot := rotateLimb(beatsA, deg)
		predicted[ax] = map[string]waveSet{}
		for l, x := range rot {
			fd, ok := templateFid(fa, int(onsetPreMS/gridMS)-int(math.Round(float64(fa.Fiducials.QRSOn)/gridMS)))
			if ok {
				predicted[ax][l] = measureWaves(x, fd)
			}
		}
	}
	for i := range c.res.Changes {
		ch := &c.res.Changes[i]
		if !ch.Raised || ch.Lead == "" {
			continue
		}
		after, u := float64(ch.After), float64(ch.U)
		for _, ax := range []string{ItemQRSAxis, ItemTAxis} {
			if p, ok := predicted[ax][ch.Lead]; ok {
				if v := p.get(ch.Item); !math.IsNaN(v) && math.Abs(after-v) <= u {
					ch.Raised, ch.ExplainedBy = false, ax
					ch.Message += fmt.Sprintf("; follows the %s shift (A's beat turned by %+.0f° gives %.2f)", itemNames[ax], shift[ax], v)
					break
				}
			}
		}
		if ch.Raised && c.res.GainMismatch && ch.Unit == "mV" {
			g := float64(c.res.GainFactor)
			if math.Abs(after-g*float64(ch.Before)) <= u {
				ch.Raised, ch.ExplainedBy = false, "gain"
				ch.Message += fmt.Sprintf("; A's value times the common gain factor %.2f", g)
			}
		}
	}
}

// einthovenBroken is the residual of Einthoven's law, relative to the
// limb leads' mean spread (RMS of I, II and III), above which a record's limb leads are taken as misread:
// traced from a picture they keep it to within about a tenth (the
// digitizer's lead-law checks); a wrong layout or lead order breaks it
// by far more.
const einthovenBroken = 0.35

// einthovenMisfit returns the RMS of I + III − II over the samples where
// all three were recorded, relative to lead II's RMS there (means
// removed), and false when they share under 0.5 s.
func einthovenMisfit(r *record.Record) (float64, bool) {
	I, II, III := r.Lead("I"), r.Lead("II"), r.Lead("III")
	if I == nil || II == nil || III == nil || I.RateHz <= 0 || I.RateHz != II.RateHz || I.RateHz != III.RateHz {
		return 0, false
	}
	at := func(s *record.Signal, t float64) float64 {
		k := int(math.Round((t - s.StartS) * s.RateHz))
		if k < 0 || k >= len(s.MV) {
			return math.NaN()
		}
		return s.MV[k]
	}
	var a, b, c []float64
	for k := range II.MV {
		t := II.StartS + float64(k)/II.RateHz
		x, y, z := at(I, t), II.MV[k], at(III, t)
		if math.IsNaN(x) || math.IsNaN(y) || math.IsNaN(z) {
			continue
		}
		a, b, c = append(a, x), append(b, y), append(c, z)
	}
	if float64(len(b)) < 0.5*II.RateHz {
		return 0, false
	}
	mean := func(v []float64) float64 {
		m := 0.0
		for _, x := range v {
			m += x
		}
		return m / float64(len(v))
	}
	ma, mb, mc := mean(a), mean(b), mean(c)
	// Relative to the three leads' mean spread, not to lead II's alone: on
	// a heart whose axis is near -30° lead II is nearly isoelectric, and
	// the digitizer's small error in I and III (a few tens of µV) is
	// then many times II's own spread.
	var res, ref float64
	for k := range b {
		d := (a[k] - ma) + (c[k] - mc) - (b[k] - mb)
		res += d * d
		ref += ((a[k]-ma)*(a[k]-ma) + (b[k]-mb)*(b[k]-mb) + (c[k]-mc)*(c[k]-mc)) / 3
	}
	if ref <= 0 {
		return 0, false
	}
	return math.Sqrt(res / ref), true
}
