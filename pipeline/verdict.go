package pipeline

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"tracelift/axis"
	"tracelift/calib"
	"tracelift/digitize"
	"tracelift/record"
	"tracelift/stats"
)

// Level says how far a page's measurements can be trusted.
type Level string

// The three levels, from best to worst.
const (
	Ready       Level = "ready"        // read it as it stands
	Care        Level = "care"         // read it, with the reasons in mind
	NotReadable Level = "not_readable" // do not read its measurements; do what the reasons say
)

func (l Level) rank() int {
	switch l {
	case Care:
		return 1
	case NotReadable:
		return 2
	}
	return 0
}

// Label is the level in words for a person.
func (l Level) Label() string {
	switch l {
	case Ready:
		return "ready to read"
	case Care:
		return "read with care"
	case NotReadable:
		return "not to be read"
	}
	return string(l)
}

// Reason is one piece of evidence behind a verdict, in plain words, with
// what the user can do about it.
type Reason struct {
	Code  string `json:"code"`
	Level Level  `json:"level"`
	Text  string `json:"text"`
	Do    string `json:"do,omitempty"`
}

// Verdict is the pipeline's judgement of one page.
type Verdict struct {
	Level   Level
	Reasons []Reason
}

// Thresholds of the verdict. They were set on the rendered bench
// (`tracelift-cli coverage`, seed 1): pages read in the right layout
// stay below the law limit, pages forced into a wrong layout or lead
// order go far above it.
const (
	// lawCareUV and lawBadUV bound the largest limb-law residual (RMS over
	// a column of simultaneous leads). 100 µV is a full small box at
	// 10 mm/mV; a limb lead read under the wrong name breaks the laws by
	// several hundred.
	lawCareUV = 60
	lawBadUV  = 150
	// Scale confidence below which the scale is to be checked (calib
	// gives 0.2–0.25 to a scale from the sheet's size, 0.4 to a file's
	// stated dpi, 0.5 to a scale given by hand).
	scaleCare = 0.45
	// Lead confidence limits (mean per-column trace confidence).
	leadCare = 0.6
	leadBad  = 0.35
	// RR intervals whose median absolute deviation exceeds this share of
	// their median are no rhythm a heart makes (atrial fibrillation stays
	// well under it, common practice): the beats found are not beats.
	rrSpreadBad = 0.35
	// A rate more than this share away from the one the beats' median
	// interval gives carries a stray interval (a pulse taken for a beat,
	// say); the measurements' own doubt uses the same limit.
	rateDisagree = axis.RateDisagreeShare
	// A QRS axis interval wider than this (half-width, degrees) says
	// nothing about the axis.
	axisHalfCare = 30
)

// Judge weighs what the pipeline knows of a page: where the scale came
// from and how sure it is, whether a calibration pulse was read, how the
// traced leads fit the layout (the lead laws), their coverage and
// confidence, and whether the measurements hang together. Any input may be
// nil (a stage that did not run).
func Judge(cal *calib.Result, dr *digitize.Result, f *axis.Findings, measureErr error) Verdict {
	var v Verdict
	add := func(l Level, code, do, format string, a ...any) {
		v.Reasons = append(v.Reasons, Reason{Code: code, Level: l, Text: fmt.Sprintf(format, a...), Do: do})
	}
	if cal == nil || dr == nil || dr.Record == nil {
		add(NotReadable, "not_traced", "check that the file is an ECG printout; give the scale and the layout by hand",
			"the page could not be traced")
		return v.finish()
	}
	// Scale and settings.
	switch {
	case cal.Source == "page" || cal.Source == "file":
		add(Care, "scale_guessed", "give the scale by hand (the scan's dpi, or two points a known distance apart)",
			"the scale comes from the %s, not from the paper's grid or a calibration pulse", map[string]string{"page": "sheet's size", "file": "file's stated resolution"}[cal.Source])
	case cal.Confidence < scaleCare:
		add(Care, "scale_unsure", "give the scale by hand if the grid is hard to see",
			"the scale was found with low confidence (%.0f %%)", 100*cal.Confidence)
	}
	if len(cal.Pulses) == 0 {
		add(Care, "no_pulse", "check the gain and speed printed on the page and give them by hand if they differ",
			"no calibration pulse was read: %g mm/mV and %g mm/s were taken from the printed settings or assumed", cal.GainMMPerMV, cal.SpeedMMPerS)
	}
	if len(cal.Pulses) > 0 && cal.SpeedFrom == calib.SpeedAssumed {
		// A pulse was read, but its width is no 200 ms at 25 or 50 mm/s
		// and no printed speed was read: the speed is the common one,
		// not the page's (calib.Result.TakePrinted decides).
		add(Care, "speed_assumed", "check the paper speed printed on the page (25 or 50 mm/s) and give it by hand if it differs",
			"the calibration pulse's width does not tell the paper speed and no printed speed was read: %g mm/s is assumed", cal.SpeedMMPerS)
	}
	if dr.TimeZero == digitize.T0Fall {
		add(Care, "time_zero_unsure", "check where the traces start after the calibration pulse",
			"the calibration pulse is printed joined to the traces and the page is not a standard 10 s page: time 0 is taken at the pulse's falling stroke and may be off by the pulse's lead-out")
	}
	// A layout given by hand that the page does not show (digitize says
	// why): the leads may be named after the wrong rows.
	if dr.Misfit != "" {
		add(Care, "layout_not_shown", "choose the layout the page shows, or let it be found",
			"%s", dr.Misfit)
	}
	// Layout fit: the limb-lead laws over each column of simultaneous leads.
	worst, worstLead := worstLaw(dr)
	switch {
	case worst > lawBadUV:
		add(NotReadable, "layout_misfit", "give the layout and the lead order by hand (and turn the page if it was read sideways)",
			"the limb leads break Einthoven's and Goldberger's laws by up to %.0f µV (worst %s): the layout or the lead order was probably misread", worst, worstLead)
	case worst > lawCareUV:
		add(Care, "layout_strain", fmt.Sprintf("check %s against the paper", worstLead),
			"the limb leads disagree by up to %.0f µV (worst %s)", worst, worstLead)
	}
	// Coverage and confidence of the leads.
	leads := dr.Record.Leads()
	if n := countStandard(leads); n < 12 && dr.Layout != "1x1" {
		add(Care, "leads_missing", "check the page for the missing leads, or give the layout by hand",
			"only %d of the 12 standard leads were traced", n)
	}
	var low, bad, sparse []string
	var sum float64
	for _, l := range leads {
		q := dr.Quality[l]
		sum += q.Confidence
		switch {
		case q.Confidence < leadBad:
			bad = append(bad, l)
		case q.Confidence < leadCare:
			low = append(low, l)
		}
		if q.Coverage < 0.8 {
			sparse = append(sparse, l)
		}
	}
	sortLeads(low, bad, sparse)
	if len(leads) > 0 && sum/float64(len(leads)) < leadBad {
		add(NotReadable, "traces_lost", "use a sharper picture of the page, or trace the leads by hand",
			"the traces were followed with little confidence (mean %.0f %%)", 100*sum/float64(len(leads)))
	} else if len(bad)+len(low) > 0 {
		add(Care, "traces_faint", "check these leads against the paper", "traces of low confidence: %s", strings.Join(append(bad, low...), ", "))
	}
	if len(sparse) > 0 {
		add(Care, "traces_gappy", "check these leads against the paper", "more than a fifth of the window has no trace in %s", strings.Join(sparse, ", "))
	}
	// Measurements that hang together.
	if measureErr != nil || f == nil {
		add(NotReadable, "not_measured", "check the traces; a strip shorter than 2 s cannot be measured",
			"nothing could be measured on the traces")
		return v.finish()
	}
	var rrs []float64
	for _, b := range f.Beats {
		if b.RRS.OK() && b.RRS > 0 {
			rrs = append(rrs, float64(b.RRS))
		}
	}
	if med, mad := stats.MedianMAD(rrs); len(rrs) >= 3 && mad > rrSpreadBad*med {
		add(NotReadable, "beats_chaotic", "turn the page if it was read sideways, or give the layout by hand",
			"the beats found vary too much to be a heart's rhythm (RR %.0f ms, typical deviation %.0f ms)", 1000*med, 1000*mad)
	} else if hr := f.HeartRateBPM; len(rrs) >= 3 && hr.OK() && math.Abs(float64(hr)-60/med) > rateDisagree*60/med {
		add(Care, "rate_disagrees", "count the beats on the paper",
			"the rate (%.0f bpm) disagrees with the beats found across the page (%.0f bpm from their median interval)", float64(hr), 60/med)
	}
	if f.TimeScaleDoubt {
		add(Care, "time_scale_doubt", "check the paper speed printed on the page (25 or 50 mm/s) and give it by hand",
			"the QRS (%.0f ms) and QT (%.0f ms) are what a heart shows at another paper speed than the %g mm/s read: the speed was probably misread, and every interval and the rate with it", float64(f.IntervalsMS.QRS), float64(f.IntervalsMS.QT), cal.SpeedMMPerS)
	}
	if f.RhythmNote != "" {
		add(Care, "rhythm_unsure", "count the beats on the paper", "%s", f.RhythmNote)
	}
	if ci := f.Axis.QRSDegCI90; ci[0].OK() && ci[1].OK() && float64(ci[1]-ci[0])/2 > axisHalfCare {
		if h := float64(ci[1]-ci[0]) / 2; h >= 180 {
			add(Care, "axis_unsure", "read the limb leads themselves", "the QRS axis could lie anywhere on the circle")
		} else {
			add(Care, "axis_unsure", "read the limb leads themselves", "the QRS axis is uncertain by ±%.0f°", h)
		}
	}
	return v.finish()
}

func (v Verdict) finish() Verdict {
	v.Level = Ready
	for _, r := range v.Reasons {
		if r.Level.rank() > v.Level.rank() {
			v.Level = r.Level
		}
	}
	sort.SliceStable(v.Reasons, func(i, j int) bool { return v.Reasons[i].Level.rank() > v.Reasons[j].Level.rank() })
	return v
}

// withhold removes what a page that is not to be read must not show: the
// flags, the categories, the borderline notes. The numbers stay for the
// record (the JSON and the audit), behind the verdict.
func withhold(f *axis.Findings) {
	if f == nil {
		return
	}
	f.Flags = nil
	f.Borderline = nil
	f.Axis.QRSCategory = ""
	f.Axis.QRSCategoryRange = ""
	f.TransitionCl = ""
	f.Rhythm = "undetermined"
}

// Lines returns the verdict as lines for a person: the level, then each
// reason with what to do.
func (v Verdict) Lines() []string {
	out := []string{"This page is " + v.Level.Label() + "."}
	for _, r := range v.Reasons {
		s := r.Text
		if r.Do != "" {
			s += " — " + r.Do
		}
		out = append(out, s)
	}
	return out
}

func countStandard(leads []string) int {
	n := 0
	for _, l := range leads {
		if record.IsStandard(l) {
			n++
		}
	}
	return n
}

func sortLeads(ls ...[]string) {
	for _, l := range ls {
		sort.Slice(l, func(i, j int) bool { return leadRank(l[i]) < leadRank(l[j]) })
	}
}

// worstLaw is the largest limb-law residual (µV) over the columns of a
// tracing and the lead that most breaks the laws there; 0 when no column
// held the leads for a check (−1 in LawCheck).
func worstLaw(dr *digitize.Result) (float64, string) {
	worst, lead := 0.0, ""
	for _, lc := range dr.Laws {
		for _, r := range append([]float64{lc.EinthovenRMSuV}, lc.GoldbergerRMSuV[:]...) {
			if !math.IsNaN(r) && r > worst {
				worst, lead = r, lc.Worst
			}
		}
	}
	return worst, lead
}
