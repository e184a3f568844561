package batch

import (
	"encoding/json"
	"fmt"
	"math"
	"strconv"

	"tracelift/pipeline"
	"tracelift/stats"
)

// Findings is the part of a page's JSON document that the summary and the
// log carry. Unmeasured numbers are NaN.
type Findings struct {
	HeartRateBPM float64
	PRMS         float64
	QRSMS        float64
	QTMS         float64
	QTcBazettMS  float64
	QRSAxisDeg   float64
	Transition   string
	// MedianLeadConfidence is the median of the per-lead tracing
	// confidences (0..1); NaN when no lead was traced.
	MedianLeadConfidence float64
	LeadConfidence       map[string]float64
	CalibConfidence      float64
	MeasureError         string
	// Verdict is the page's verdict (ready, care, not_readable; see
	// pipeline.Judge); "" when the document has none.
	Verdict string
}

// NoFindings returns Findings with every number unmeasured.
func NoFindings() Findings {
	n := math.NaN()
	return Findings{HeartRateBPM: n, PRMS: n, QRSMS: n, QTMS: n, QTcBazettMS: n, QRSAxisDeg: n,
		MedianLeadConfidence: n, CalibConfidence: n}
}

// MarshalJSON writes NaN as null.
func (f Findings) MarshalJSON() ([]byte, error) {
	num := func(v float64) any {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil
		}
		return v
	}
	m := map[string]any{
		"heart_rate_bpm": num(f.HeartRateBPM),
		"intervals_ms": map[string]any{
			"pr": num(f.PRMS), "qrs": num(f.QRSMS), "qt": num(f.QTMS), "qtc_bazett": num(f.QTcBazettMS),
		},
		"qrs_axis_deg": num(f.QRSAxisDeg),
		"transition":   f.Transition,
		"quality": map[string]any{
			"median_lead_confidence": num(f.MedianLeadConfidence),
			"calibration_confidence": num(f.CalibConfidence),
			"leads":                  f.LeadConfidence,
		},
	}
	if f.MeasureError != "" {
		m["measure_error"] = f.MeasureError
	}
	if f.Verdict != "" {
		m["verdict"] = f.Verdict
	}
	return json.Marshal(m)
}

// UnmarshalJSON reads what MarshalJSON writes (a log line's findings).
func (f *Findings) UnmarshalJSON(b []byte) error {
	var m struct {
		HR        *float64            `json:"heart_rate_bpm"`
		Intervals map[string]*float64 `json:"intervals_ms"`
		Axis      *float64            `json:"qrs_axis_deg"`
		Trans     string              `json:"transition"`
		Quality   struct {
			Median *float64           `json:"median_lead_confidence"`
			Calib  *float64           `json:"calibration_confidence"`
			Leads  map[string]float64 `json:"leads"`
		} `json:"quality"`
		MeasureError string `json:"measure_error"`
		Verdict      string `json:"verdict"`
	}
	if err := json.Unmarshal(b, &m); err != nil {
		return err
	}
	*f = Findings{
		HeartRateBPM: orNaN(m.HR), PRMS: orNaN(m.Intervals["pr"]), QRSMS: orNaN(m.Intervals["qrs"]),
		QTMS: orNaN(m.Intervals["qt"]), QTcBazettMS: orNaN(m.Intervals["qtc_bazett"]), QRSAxisDeg: orNaN(m.Axis),
		Transition: m.Trans, MedianLeadConfidence: orNaN(m.Quality.Median), LeadConfidence: m.Quality.Leads,
		CalibConfidence: orNaN(m.Quality.Calib), MeasureError: m.MeasureError, Verdict: m.Verdict,
	}
	return nil
}

func orNaN(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

// ParseDocument reads a page's JSON document (pipeline.Document, the
// command-line contract in DEVELOPERS.md) and returns the image hash and
// the findings the summary carries. Unmeasured or missing numbers are
// NaN; a document that is not JSON, or has no image_sha256, is an error.
func ParseDocument(b []byte) (sha string, f Findings, err error) {
	f = NoFindings()
	d, err := pipeline.ParseDocument(b)
	if err != nil {
		return "", f, fmt.Errorf("batch: the JSON document does not parse: %w", err)
	}
	f.CalibConfidence = d.Calibration.Confidence
	f.MeasureError = d.MeasureErr
	f.Verdict = string(d.Verdict)
	if len(d.Quality) > 0 {
		f.LeadConfidence = map[string]float64{}
		var cs []float64
		for lead, q := range d.Quality {
			f.LeadConfidence[lead] = q.Confidence
			cs = append(cs, q.Confidence)
		}
		f.MedianLeadConfidence = stats.Median(cs)
	}
	if m := d.Findings; m != nil {
		f.HeartRateBPM = float64(m.HeartRateBPM)
		f.PRMS = float64(m.IntervalsMS.PR)
		f.QRSMS = float64(m.IntervalsMS.QRS)
		f.QTMS = float64(m.IntervalsMS.QT)
		f.QTcBazettMS = float64(m.IntervalsMS.QTcBazett)
		f.QRSAxisDeg = float64(m.Axis.QRSDeg)
		f.Transition = m.Transition
	}
	return d.ImageSHA256, f, nil
}

// formatNum writes a summary cell: empty for NaN, else at most 3 decimals.
func formatNum(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(math.Round(v*1000)/1000, 'f', -1, 64)
}

func parseNum(s string) float64 {
	if s == "" {
		return math.NaN()
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return math.NaN()
	}
	return v
}
