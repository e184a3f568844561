package axis

import (
	"encoding/json"
	"math"
)

// Caution is carried by every user-facing text that shows measurements.
const Caution = "Not a diagnostic device; every measurement is to be reviewed by a qualified clinician; local protocols and licensed practice come first."

// Num is a measured value; NaN means "not measured" and is written to JSON
// as null (JSON has no NaN).
type Num float64

// NaN returns the "not measured" value.
func NaN() Num { return Num(math.NaN()) }

// OK reports whether the value was measured.
func (n Num) OK() bool { return !math.IsNaN(float64(n)) && !math.IsInf(float64(n), 0) }

// MarshalJSON writes null for a value that was not measured, otherwise
// the number rounded to 0.0001 (0.1 ms for times in seconds).
func (n Num) MarshalJSON() ([]byte, error) {
	if !n.OK() {
		return []byte("null"), nil
	}
	return json.Marshal(math.Round(float64(n)*1e4) / 1e4)
}

// UnmarshalJSON reads null as NaN.
func (n *Num) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*n = NaN()
		return nil
	}
	var f float64
	if err := json.Unmarshal(b, &f); err != nil {
		return err
	}
	*n = Num(f)
	return nil
}

// Options tune Measure. The zero value chooses everything automatically.
type Options struct {
	// BeatLead names the lead to detect beats on; "" chooses the lead with
	// the longest gap-free coverage and the clearest QRS complexes.
	BeatLead string
	// LeadQuality is a per-lead digitization confidence in 0..1 (1 = exact,
	// as for a record read from a file; missing leads count as 1). Lower
	// values enlarge the uncertainties.
	LeadQuality map[string]float64
	// Picture describes the picture the record was traced from; its
	// zero value (a record read from a file) adds no picture error to
	// the intervals.
	Picture Picture
}

// Beat is one detected QRS complex.
type Beat struct {
	TS        float64 `json:"t_s"`  // R fiducial, seconds on the record clock
	RRS       Num     `json:"rr_s"` // interval from the previous beat (null for the first of a stretch)
	Lead      string  `json:"lead"` // lead it was detected on
	Premature bool    `json:"premature,omitempty"`
	// Class is "dominant", "premature" (dominant shape, early),
	// "different" (QRS shape unlike the dominant beat) or
	// "premature-different".
	Class string `json:"class"`
	Corr  Num    `json:"corr"` // QRS correlation with the dominant beat
}

// Intervals are the global intervals in ms with their uncertainties.
type Intervals struct {
	PR            Num `json:"pr"`
	QRS           Num `json:"qrs"`
	QT            Num `json:"qt"`
	QTcBazett     Num `json:"qtc_bazett"`
	QTcFridericia Num `json:"qtc_fridericia"`
	QTcFramingham Num `json:"qtc_framingham"`
	QTcHodges     Num `json:"qtc_hodges"`
	RR            Num `json:"rr"` // mean RR used for the corrections
	PRSD          Num `json:"pr_sd"`
	QRSSD         Num `json:"qrs_sd"`
	QTSD          Num `json:"qt_sd"`
	QTcSD         Num `json:"qtc_sd"` // of Bazett's QTc, the most rate-sensitive
	// 90 % intervals [lo, hi] combining the spread over beats with the
	// error the picture adds (see Picture); [null, null] when not measured.
	PRCI90        [2]Num `json:"pr_ci90"`
	QRSCI90       [2]Num `json:"qrs_ci90"`
	QTCI90        [2]Num `json:"qt_ci90"`
	QTcBazettCI90 [2]Num `json:"qtc_bazett_ci90"`
}

// Fiducials are the global wave boundaries of the representative beat in
// ms relative to the R fiducial (negative before it).
type Fiducials struct {
	POn    Num `json:"p_on"`
	POff   Num `json:"p_off"`
	QRSOn  Num `json:"qrs_on"`
	QRSOff Num `json:"qrs_off"`
	TPeak  Num `json:"t_peak"`
	TEnd   Num `json:"t_end"`
}

// LeadMeasure holds the amplitudes (mV, from the PR baseline) and areas
// (mV·ms) of one lead's representative beat.
type LeadMeasure struct {
	Lead    string  `json:"lead"`
	Beats   int     `json:"beats"` // beats in its median
	Quality float64 `json:"quality"`
	P       Num     `json:"p_mv"`
	Q       Num     `json:"q_mv"`
	R       Num     `json:"r_mv"`
	S       Num     `json:"s_mv"`
	STJ60   Num     `json:"st_j60_mv"`
	T       Num     `json:"t_mv"`
	QRSPP   Num     `json:"qrs_pp_mv"` // peak to peak
	PArea   Num     `json:"p_area"`
	QRSArea Num     `json:"qrs_area"`
	TArea   Num     `json:"t_area"` // ST-T area, QRS offset to T end
	QRSSD   Num     `json:"qrs_area_sd"`
}

// AxisMethod is one method's reading of the frontal axes.
type AxisMethod struct {
	Method string `json:"method"` // "least_squares", "quadrant", "isoelectric"
	QRSDeg Num    `json:"qrs_deg"`
	PDeg   Num    `json:"p_deg"`
	TDeg   Num    `json:"t_deg"`
	Detail string `json:"detail"`
	// Classical is the isoelectric method's textbook reading, the
	// perpendicular of the isoelectric lead (a multiple of 30°).
	Classical Num `json:"classical_deg"`
}

// Axes are the frontal axes. The headline values are the least-squares
// net-area vector; Methods shows all three side by side.
type Axes struct {
	QRSDeg      Num          `json:"qrs_deg"`
	PDeg        Num          `json:"p_deg"`
	TDeg        Num          `json:"t_deg"`
	QRSCategory string       `json:"qrs_category"` // normal, left, right, extreme (AHA/ACCF/HRS 2009)
	QRSDegSD    Num          `json:"qrs_deg_sd"`
	PDegSD      Num          `json:"p_deg_sd"`
	TDegSD      Num          `json:"t_deg_sd"`
	Spread      Num          `json:"methods_spread_deg"` // largest QRS difference between methods
	Methods     []AxisMethod `json:"methods"`
	// 90 % intervals in degrees, lo < value < hi, not wrapped (a range
	// past ±180° goes on round the circle).
	QRSDegCI90 [2]Num `json:"qrs_deg_ci90"`
	PDegCI90   [2]Num `json:"p_deg_ci90"`
	TDegCI90   [2]Num `json:"t_deg_ci90"`
	// QRSCategoryRange names every category the QRS interval reaches
	// when it crosses a boundary ("normal or left"); "" otherwise.
	QRSCategoryRange string `json:"qrs_category_range,omitempty"`
}

// Borderline is a measurement whose 90 % interval crosses a category
// limit: both sides are named.
type Borderline struct {
	Measure string  `json:"measure"` // "qrs_axis", "qtc_bazett", "heart_rate"
	Limit   float64 `json:"limit"`
	Below   string  `json:"below"`
	Above   string  `json:"above"`
	Message string  `json:"message"`
}

// Flag is a finding worth a second look, with its caution.
type Flag struct {
	Code    string `json:"code"`
	Message string `json:"message"`
	Caution string `json:"caution,omitempty"`
}

// Template is a lead's representative (median) beat.
type Template struct {
	Lead   string    `json:"lead"`
	RateHz float64   `json:"rate_hz"`
	T0S    float64   `json:"t0_s"` // time of MV[0] relative to the R fiducial (negative)
	MV     []float64 `json:"-"`
}

// Findings are the measurements of one record.
type Findings struct {
	Record       string `json:"record,omitempty"`
	HeartRateBPM Num    `json:"heart_rate_bpm"`
	HeartRateSD  Num    `json:"heart_rate_sd"`
	// HeartRateCI90 is the 90 % interval of the mean rate.
	HeartRateCI90 [2]Num `json:"heart_rate_bpm_ci90"`
	RRMeanS       Num    `json:"rr_mean_s"`
	RRSDS         Num    `json:"rr_sd_s"`
	Rhythm        string `json:"rhythm"` // "regular", "irregular", "undetermined"
	// TimeScaleDoubt is true when, on a digitized record, the rate and
	// intervals look like a heart's drawn at another paper speed than the
	// one read (see TimeScaleRatio); their intervals then hold the
	// reading at the other speed too. TimeScaleRatio is the ratio.
	TimeScaleDoubt bool    `json:"time_scale_doubt,omitempty"`
	TimeScaleRatio float64 `json:"-"`
	// RhythmNote says why the rhythm call is unsure, "" when it is not.
	RhythmNote   string        `json:"rhythm_note,omitempty"`
	BeatLead     string        `json:"beat_lead"`
	Beats        []Beat        `json:"beats"`
	Premature    int           `json:"premature_beats"`
	IntervalsMS  Intervals     `json:"intervals_ms"`
	Fiducials    Fiducials     `json:"fiducials_ms"`
	Axis         Axes          `json:"axis"`
	Transition   string        `json:"transition"`
	TransitionAt Num           `json:"transition_position"` // 1 = V1 … 6 = V6, interpolated
	TransitionCl string        `json:"transition_class"`    // early, normal, late
	RProgression []Num         `json:"r_progression_mv"`    // R in V1..V6
	Leads        []LeadMeasure `json:"leads"`
	Flags        []Flag        `json:"flags"`
	// Borderline lists the measurements whose interval crosses a limit.
	Borderline []Borderline `json:"borderline,omitempty"`
	// PictureSD is the picture's share of each measurement's error (one
	// standard deviation, in the measurement's unit), keyed like the JSON
	// ("heart_rate_bpm", "pr", "qrs", "qt", "qtc_bazett", "qrs_deg",
	// "p_deg", "t_deg"); empty for a record read from a file.
	PictureSD map[string]Num `json:"picture_sd,omitempty"`
	// SpreadSD is the engine's own share in the intervals: the standard
	// error over beats, the delineation's threshold sensitivity and the
	// 2 ms grid step (one standard deviation), keyed like PictureSD.
	SpreadSD map[string]Num `json:"spread_sd,omitempty"`
	// PictureUnitSD is each PictureSD at a model size of 1 and a factor
	// of 1 (before the axes' 180° limit), and MeanLeadConfidence the mean
	// lead confidence the factor used: for refitting the picture model.
	PictureUnitSD      map[string]Num `json:"-"`
	MeanLeadConfidence float64        `json:"-"`
	Caution            string         `json:"caution"`
	Templates          []Template     `json:"-"`
}

// Lead returns the measures of the named lead, or nil.
func (f *Findings) Lead(name string) *LeadMeasure {
	for i := range f.Leads {
		if f.Leads[i].Lead == name {
			return &f.Leads[i]
		}
	}
	return nil
}
