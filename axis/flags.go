package axis

import (
	"fmt"
	"math"
	"strings"

	"tracelift/record"
)

// screening is the caution carried by every voltage criterion.
const screening = "screening criterion only: voltage criteria have limited sensitivity and specificity and depend on age, sex and build; confirm by other means"

// flags adds the findings worth a second look. Thresholds are the usual
// adult ones (common practice, from memory unless a source is named).
func flags(f *Findings) {
	add := func(code, caution, format string, a ...any) {
		f.Flags = append(f.Flags, Flag{Code: code, Message: fmt.Sprintf(format, a...), Caution: caution})
	}
	val := func(lead string, get func(*LeadMeasure) Num) (float64, bool) {
		lm := f.Lead(lead)
		if lm == nil {
			return math.NaN(), false
		}
		v := get(lm)
		return float64(v), v.OK()
	}
	pA := func(l *LeadMeasure) Num { return l.PArea }
	qA := func(l *LeadMeasure) Num { return l.QRSArea }
	tA := func(l *LeadMeasure) Num { return l.TArea }
	rA := func(l *LeadMeasure) Num { return l.R }
	sA := func(l *LeadMeasure) Num { return l.S }
	ppA := func(l *LeadMeasure) Num { return l.QRSPP }

	// Rate and rhythm (AHA/ACCF/HRS 2009 use 50 and 100 bpm). A value
	// whose 90 % interval crosses a limit is flagged as borderline,
	// naming both sides, instead.
	border := func(measure string, at float64) bool {
		if b := f.borderlineOf(measure, at); b != nil {
			add("borderline_"+measure, "", "%s", b.Message)
			return true
		}
		return false
	}
	if hr := f.HeartRateBPM; hr.OK() {
		switch {
		case border("heart_rate", 50), border("heart_rate", 100):
		case hr < 50:
			add("bradycardia", "", "heart rate %.0f bpm (below 50)", float64(hr))
		case hr > 100:
			add("tachycardia", "", "heart rate %.0f bpm (above 100)", float64(hr))
		}
	}
	if f.RhythmNote != "" {
		add("rhythm_unsure", "count the beats on the paper", "rhythm unsure: %s", f.RhythmNote)
	}
	if f.Rhythm == "irregular" {
		add("irregular", "", "irregular RR intervals (SD %.0f ms)", 1000*float64(f.RRSDS))
	}
	if f.Premature > 0 {
		add("premature_beats", "beats are classed by timing and QRS shape only", "%d premature beat(s) of %d", f.Premature, len(f.Beats))
	}

	// Intervals.
	iv := f.IntervalsMS
	if iv.PR.OK() {
		switch {
		case border("pr", 120), border("pr", 200):
		case iv.PR > 200:
			add("long_pr", "", "PR %.0f ms (above 200)", float64(iv.PR))
		case iv.PR < 120:
			add("short_pr", "", "PR %.0f ms (below 120)", float64(iv.PR))
		}
	}
	if iv.QRS.OK() && !border("qrs", 120) && iv.QRS >= 120 {
		add("wide_qrs", "", "QRS %.0f ms (120 or more)", float64(iv.QRS))
	}
	if iv.QTcBazett.OK() && !border("qtc_bazett", 460) && iv.QTcBazett > 460 {
		add("long_qtc", "the limit is 450 ms for men and 460 ms for women (AHA/ACCF/HRS 2009); Bazett over-corrects at fast rates",
			"QTc (Bazett) %.0f ms", float64(iv.QTcBazett))
	}

	// Axis: an interval that reaches another category is borderline.
	if r := f.Axis.QRSCategoryRange; r != "" {
		add("borderline_axis", "the axis sits near a category limit; read the limb leads themselves",
			"QRS axis %+.0f° (90 %% interval %+.0f° to %+.0f°): borderline, %s", float64(f.Axis.QRSDeg),
			float64(f.Axis.QRSDegCI90[0]), float64(f.Axis.QRSDegCI90[1]), r)
	}
	switch cat := f.Axis.QRSCategory; {
	case f.Axis.QRSCategoryRange != "":
	case cat == "left":
		add("left_axis", "", "QRS axis %+.0f°: left axis deviation", float64(f.Axis.QRSDeg))
	case cat == "right":
		add("right_axis", "", "QRS axis %+.0f°: right axis deviation", float64(f.Axis.QRSDeg))
	case cat == "extreme":
		add("extreme_axis", "check the limb electrodes first", "QRS axis %+.0f°: extreme axis", float64(f.Axis.QRSDeg))
	}
	if s := f.Axis.Spread; s.OK() && s > 15 {
		add("axis_methods_disagree", "the axis is uncertain; read the leads themselves", "the three axis methods differ by up to %.0f°", float64(s))
	}

	// Limb-lead reversal (left/right arm): P and QRS negative in I with
	// both positive in aVR (T stands in for P when no P wave is found).
	pI, okPI := val(record.I, pA)
	qI, okQI := val(record.I, qA)
	pR, okPR := val(record.AVR, pA)
	qR, okQR := val(record.AVR, qA)
	if !okPI || !okPR {
		pI, okPI = val(record.I, tA)
		pR, okPR = val(record.AVR, tA)
	}
	if okPI && okQI && okPR && okQR && pI < 0 && qI < 0 && pR > 0 && qR > 0 {
		add("limb_lead_reversal", "dextrocardia gives the same picture; check the electrode placement and repeat the recording",
			"suspected left/right arm electrode reversal: negative P and QRS in I, positive in aVR")
	}

	// Low voltage: every limb lead below 0.5 mV peak to peak, or every
	// precordial lead below 1.0 mV.
	lowIn := func(leads []string, lim float64) bool {
		n := 0
		for _, l := range leads {
			v, ok := val(l, ppA)
			if !ok {
				continue
			}
			if v >= lim {
				return false
			}
			n++
		}
		return n >= 3
	}
	if lowIn(record.Limb6, 0.5) {
		add("low_voltage_limb", "check the gain of the recording", "low QRS voltage in the limb leads (all below 0.5 mV)")
	}
	if lowIn(record.Precordial, 1.0) {
		add("low_voltage_precordial", "check the gain of the recording", "low QRS voltage in the precordial leads (all below 1.0 mV)")
	}

	// Hypertrophy voltage criteria.
	sV1, ok1 := val(record.V1, sA)
	rV5, ok5 := val(record.V5, rA)
	rV6, ok6 := val(record.V6, rA)
	if ok1 && (ok5 || ok6) {
		r := math.Max(nz(rV5, ok5), nz(rV6, ok6))
		if v := math.Abs(sV1) + r; v >= 3.5 {
			// Sokolow and Lyon, Am Heart J 37:161, 1949.
			add("sokolow_lyon", screening, "Sokolow–Lyon voltage S V1 + R V5/V6 = %.2f mV (3.5 mV or more)", v)
		}
	}
	rL, okL := val(record.AVL, rA)
	sV3, ok3 := val(record.V3, sA)
	if okL && ok3 {
		// Cornell voltage (Casale et al., Circulation 75:565, 1987):
		// R aVL + S V3 above 2.8 mV in men, 2.0 mV in women.
		if v := rL + math.Abs(sV3); v > 2.0 {
			add("cornell_voltage", screening, "Cornell voltage R aVL + S V3 = %.2f mV (limits 2.8 mV men, 2.0 mV women)", v)
		}
	}

	// ST deviation at J+60 ms of 0.1 mV or more in two or more leads.
	var st []string
	for _, lm := range f.Leads {
		if record.IsStandard(lm.Lead) && lm.STJ60.OK() && math.Abs(float64(lm.STJ60)) >= 0.1 {
			st = append(st, fmt.Sprintf("%s %+.2f", lm.Lead, float64(lm.STJ60)))
		}
	}
	if len(st) >= 2 {
		add("st_deviation", "ST deviation has many causes; compare with earlier tracings and the clinical picture",
			"ST deviation of 0.1 mV or more at J+60 ms in %s", strings.Join(st, ", "))
	}
	// Poor R-wave progression: R in V3 of 0.3 mV or less with R not
	// growing from V1 to V3 (common practice, from memory). It is read
	// from the same amplitudes as the transition (R/|S| across V1..V6), so
	// the two are said together: it is only raised with a late
	// transition, and then in one flag; beside a normal or early
	// transition a small R in V3 is no finding of its own.
	prwp := false
	if rp := f.RProgression; len(rp) == 6 && rp[0].OK() && rp[2].OK() && rp[2] <= 0.3 && rp[2] <= rp[0]+0.05 && f.TransitionCl == "late" {
		prwp = true
		add("poor_r_progression", "electrode position and body build change R-wave progression",
			"poor R-wave progression with a late precordial transition (%s): R V1 %.2f mV, R V3 %.2f mV", f.Transition, float64(rp[0]), float64(rp[2]))
	}
	if !prwp && (f.TransitionCl == "late" || f.TransitionCl == "early") {
		add("transition_"+f.TransitionCl, "electrode position changes the transition", "%s precordial transition (%s)", f.TransitionCl, f.Transition)
	}

	// Digitization quality.
	var low []string
	for _, lm := range f.Leads {
		if lm.Quality < 0.5 {
			low = append(low, lm.Lead)
		}
	}
	if len(low) > 0 {
		add("low_trace_quality", "check these leads against the paper", "traces of low confidence: %s", strings.Join(low, ", "))
	}
}

func nz(v float64, ok bool) float64 {
	if !ok {
		return 0
	}
	return v
}
