package compare

// Threshold is the size of a change the trade counts as worth attention,
// with where that figure comes from. A change is raised only when it also
// exceeds the combined uncertainty of the two tracings.
type Threshold struct {
	Rule   string  `json:"rule"`
	Value  float64 `json:"value"`
	Unit   string  `json:"unit"`
	Source string  `json:"source"`
}

// The items compared. Per-lead items carry the lead's name beside them.
const (
	ItemRate       = "heart_rate"
	ItemRhythm     = "rhythm"
	ItemPR         = "pr"
	ItemQRS        = "qrs"
	ItemQT         = "qt"
	ItemQTc        = "qtc_bazett"
	ItemQRSAxis    = "qrs_axis"
	ItemPAxis      = "p_axis"
	ItemTAxis      = "t_axis"
	ItemTransition = "transition"
	ItemQ          = "q_mv"
	ItemQDur       = "q_ms"
	ItemR          = "r_mv"
	ItemS          = "s_mv"
	ItemT          = "t_mv"
	ItemST         = "st_j60_mv"
)

// Kinds of raised change that name what the trade calls them.
const (
	KindNewQ          = "new_q_wave"
	KindNewTInversion = "new_t_inversion"
	KindTUpright      = "t_now_upright"
	KindSTUp          = "st_elevation"
	KindSTDown        = "st_depression"
	KindAxisShift     = "axis_shift"
	KindLonger        = "lengthened"
	KindShorter       = "shortened"
	KindFaster        = "faster"
	KindSlower        = "slower"
	KindRhythm        = "rhythm_changed"
	KindTransition    = "transition_moved"
	KindAmplitude     = "amplitude_changed"
)

// Thresholds holds the figures used; a caller may show them beside the
// table of changes.
var Thresholds = map[string]Threshold{
	ItemST: {Rule: "ST level at J+60 ms moved by 0.1 mV or more", Value: 0.1, Unit: "mV",
		Source: "0.1 mV (1 mm at 10 mm/mV) is the new ST elevation threshold of the Fourth Universal Definition of Myocardial Infarction (Thygesen et al., 2018) in most leads, there at the J point (from memory); measured at J+60 ms here, common practice for ST shifts"},
	ItemQ: {Rule: "a new Q wave at least 0.1 mV deep and 30 ms long (20 ms in V2, V3), not in aVR", Value: 0.1, Unit: "mV",
		Source: "Q-wave criteria of the Fourth Universal Definition of Myocardial Infarction (Thygesen et al., 2018) (from memory)"},
	ItemT: {Rule: "T wave inverted (0.1 mV or deeper) where it was upright (0.1 mV or taller), or the reverse; not in aVR", Value: 0.1, Unit: "mV",
		Source: "T inversion of more than 0.1 mV, Fourth Universal Definition of Myocardial Infarction (Thygesen et al., 2018) (from memory); aVR's T is normally inverted (common practice)"},
	ItemQRSAxis: {Rule: "frontal QRS axis turned by 30° or more", Value: 30, Unit: "deg", Source: "common practice"},
	ItemPAxis:   {Rule: "frontal P axis turned by 30° or more", Value: 30, Unit: "deg", Source: "common practice, as for the QRS axis"},
	ItemTAxis:   {Rule: "frontal T axis turned by 30° or more", Value: 30, Unit: "deg", Source: "common practice, as for the QRS axis"},
	ItemQTc: {Rule: "QTc (Bazett) lengthened by 60 ms or more", Value: 60, Unit: "ms",
		Source: "ICH E14 (2005), categorical analysis of QTc increases over baseline of more than 30 and 60 ms (from memory)"},
	ItemQT: {Rule: "QT lengthened by 60 ms or more", Value: 60, Unit: "ms",
		Source: "as for QTc, ICH E14 (2005) (from memory); the uncorrected QT also moves with rate"},
	ItemQRS: {Rule: "QRS lengthened or shortened by 20 ms or more", Value: 20, Unit: "ms",
		Source: "from memory; 120 ms, the lower bound of a complete bundle branch block (AHA/ACCF/HRS 2009, Surawicz et al.), is noted when crossed"},
	ItemPR: {Rule: "PR lengthened or shortened by 40 ms or more", Value: 40, Unit: "ms",
		Source: "from memory; 200 ms, the upper limit of normal PR (common practice), is noted when crossed"},
	ItemRate: {Rule: "heart rate changed by 20 /min or more", Value: 20, Unit: "bpm", Source: "from memory"},
	ItemRhythm: {Rule: "rhythm regular on one tracing and irregular on the other", Unit: "",
		Source: "common practice"},
	ItemTransition: {Rule: "precordial transition moved by 2 lead positions or more", Value: 2, Unit: "positions",
		Source: "from memory; one position lies within the spread of precordial electrode placement (common practice)"},
	ItemR: {Rule: "R amplitude changed by 0.5 mV and by a quarter or more", Value: 0.5, Unit: "mV", Source: "from memory"},
	ItemS: {Rule: "S depth changed by 0.5 mV and by a quarter or more", Value: 0.5, Unit: "mV", Source: "from memory"},
}

// qMinMS returns the duration a Q wave must reach to count in a lead
// (Thygesen et al., 2018, from memory: 20 ms in V2 and V3, 30 ms elsewhere).
func qMinMS(lead string) float64 {
	if lead == "V2" || lead == "V3" {
		return 20
	}
	return 30
}
