package pipeline

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"

	"tracelift/axis"
	"tracelift/calib"
	"tracelift/digitize"
	"tracelift/record"
)

// CalibrationJSON is the "calibration" object of the JSON output.
type CalibrationJSON struct {
	PxPerMMX    float64       `json:"px_per_mm_x"`
	PxPerMMY    float64       `json:"px_per_mm_y"`
	GainMMPerMV float64       `json:"gain_mm_per_mv"`
	SpeedMMPerS float64       `json:"speed_mm_per_s"`
	GainFrom    string        `json:"gain_from,omitempty"`  // pulse, row_pulses, printed, stated or assumed (calib.Result.GainFrom)
	SpeedFrom   string        `json:"speed_from,omitempty"` // pulse, printed, stated or assumed (calib.Result.SpeedFrom)
	RotationDeg float64       `json:"rotation_deg"`
	Turned      int           `json:"quarter_turns"`
	Source      string        `json:"source"`
	Confidence  float64       `json:"confidence"`
	Pulses      []calib.Pulse `json:"pulses,omitempty"`
	Warnings    []string      `json:"warnings,omitempty"`
	// Adjustments are the corrections made once the traces were found,
	// in order (digitize.Result.Adjustments).
	Adjustments []calib.Adjustment `json:"adjustments,omitempty"`
}

// LayoutJSON is the "layout" object of the JSON output.
type LayoutJSON struct {
	Name    string           `json:"name"`
	Cabrera bool             `json:"cabrera"`
	Panels  []digitize.Panel `json:"panels"`
	// TimeZero says how time 0 was found: from the traces' first ink,
	// from their end and a standard 10 s page (a pulse joined to the
	// traces), or at a joined pulse's falling stroke.
	TimeZero string `json:"time_zero,omitempty"`
}

// Document is the JSON file written beside the signals: provenance,
// calibration, layout, quality, lead-law checks, corrections, and the
// findings of the measurement engine at the top level. Every key is
// snake_case (a test walks the types); the findings' keys are merged in
// beside the document's (the findings' per-lead measures under "leads",
// the record's lead names under "recorded_leads"), and where both name a
// key ("caution") the document's stands. The batch runner reads it back with
// ParseDocument, so writer and reader share this one type.
type Document struct {
	File        string                          `json:"file"`
	ImageSHA256 string                          `json:"image_sha256"`
	Software    string                          `json:"software"`
	Caution     string                          `json:"caution"`
	Source      *SourceJSON                     `json:"source,omitempty"`
	Verdict     Level                           `json:"verdict,omitempty"`
	Reasons     []Reason                        `json:"verdict_reasons,omitempty"`
	Calibration CalibrationJSON                 `json:"calibration"`
	Layout      LayoutJSON                      `json:"layout"`
	Quality     map[string]digitize.LeadQuality `json:"quality"`
	LeadLaws    []digitize.LawCheck             `json:"lead_laws,omitempty"`
	Check       []digitize.Place                `json:"check_by_hand,omitempty"`
	Leads       []string                        `json:"recorded_leads"`
	Corrections []record.Correction             `json:"corrections,omitempty"`
	MeasureErr  string                          `json:"measure_error,omitempty"`
	TimingsMS   map[string]float64              `json:"timings_ms"`
	// Findings are the measurements, merged in at the top level; nil
	// when the page was not measured.
	Findings *axis.Findings `json:"-"`
}

// Document assembles the JSON document of an outcome.
func (o *Outcome) Document() Document {
	d := Document{Software: Software, Caution: Caution}
	if o.Page != nil {
		d.File = o.Page.Path
		d.ImageSHA256 = o.Page.SHA256
		d.Source = o.source()
	}
	if c := o.Calib; c != nil {
		d.Calibration = CalibrationJSON{
			PxPerMMX: c.PxPerMMX, PxPerMMY: c.PxPerMMY,
			GainMMPerMV: c.GainMMPerMV, SpeedMMPerS: c.SpeedMMPerS, GainFrom: c.GainFrom, SpeedFrom: c.SpeedFrom,
			RotationDeg: c.RotationDeg, Turned: c.Turned,
			Source: c.Source, Confidence: c.Confidence,
			Pulses: c.Pulses, Warnings: c.Warnings,
		}
	}
	if dr := o.Digitized; dr != nil {
		d.Calibration.Adjustments = dr.Adjustments
		d.Layout = LayoutJSON{Name: dr.Layout, Cabrera: dr.Cabrera, Panels: dr.Panels, TimeZero: dr.TimeZero}
		d.Quality = dr.Quality
		d.LeadLaws = dr.Laws
		d.Check = dr.Check
		if dr.Record != nil {
			d.Leads = dr.Record.Leads()
			d.Corrections = dr.Record.Corrections
		}
	}
	if o.MeasureErr != nil {
		d.MeasureErr = o.MeasureErr.Error()
	}
	d.Findings = o.Findings
	if o.Digitized != nil {
		d.Verdict, d.Reasons = o.Verdict.Level, o.Verdict.Reasons
		if d.Reasons == nil {
			d.Reasons = []Reason{}
		}
	}
	ms := func(t interface{ Seconds() float64 }) float64 { return t.Seconds() * 1000 }
	d.TimingsMS = map[string]float64{
		"load": ms(o.Timings.Load), "calib": ms(o.Timings.Calib),
		"digitize": ms(o.Timings.Digitize), "measure": ms(o.Timings.Measure),
	}
	return d
}

// documentBase is Document without its methods, for the JSON package.
type documentBase Document

// MarshalJSON writes the document with the findings' fields merged in at
// the top level (heart_rate_bpm, intervals_ms, axis, transition, flags…),
// so digitize and measure outputs share one shape.
func (d Document) MarshalJSON() ([]byte, error) {
	base, err := json.Marshal(documentBase(d))
	if err != nil || d.Findings == nil {
		return base, err
	}
	fb, err := json.Marshal(d.Findings)
	if err != nil {
		return nil, err
	}
	m := map[string]json.RawMessage{}
	if err := json.Unmarshal(fb, &m); err != nil {
		return nil, err
	}
	if err := json.Unmarshal(base, &m); err != nil {
		return nil, err
	}
	return json.Marshal(m)
}

// UnmarshalJSON reads what MarshalJSON writes. The findings are read
// when the document has a heart_rate_bpm key (the findings always write
// it); otherwise Findings stays nil.
func (d *Document) UnmarshalJSON(b []byte) error {
	var base documentBase
	if err := json.Unmarshal(b, &base); err != nil {
		return err
	}
	*d = Document(base)
	var keys map[string]json.RawMessage
	if err := json.Unmarshal(b, &keys); err != nil {
		return err
	}
	if _, ok := keys["heart_rate_bpm"]; !ok {
		return nil
	}
	f := struct {
		*axis.Findings
		// The document's own keys of the same name, which stand in the
		// merged file instead of the findings'.
		Caution json.RawMessage `json:"caution"`
	}{Findings: unmeasured()}
	if err := json.Unmarshal(b, &f); err != nil {
		return err
	}
	d.Findings = f.Findings
	return nil
}

// unmeasured returns findings whose headline numbers are NaN, for a
// document that lacks some of their keys.
func unmeasured() *axis.Findings {
	n := axis.NaN()
	return &axis.Findings{HeartRateBPM: n, RRMeanS: n,
		IntervalsMS: axis.Intervals{PR: n, QRS: n, QT: n, QTcBazett: n, QTcFridericia: n, QTcFramingham: n, QTcHodges: n},
		Axis:        axis.Axes{QRSDeg: n, PDeg: n, TDeg: n}}
}

// ErrDocument is returned by ParseDocument for bytes that are not a
// page's JSON document.
var ErrDocument = errors.New("pipeline: not a page's JSON document")

// ParseDocument reads a JSON document written by Export (the
// command-line contract in DEVELOPERS.md). A document that does not parse
// or has no image_sha256 is an error wrapping ErrDocument.
func ParseDocument(b []byte) (*Document, error) {
	var d Document
	if err := json.Unmarshal(b, &d); err != nil {
		return nil, fmt.Errorf("%w: %v", ErrDocument, err)
	}
	if d.ImageSHA256 == "" {
		return nil, fmt.Errorf("%w: it has no image_sha256", ErrDocument)
	}
	return &d, nil
}

// MarshalJSON writes the outcome's document (see Document.MarshalJSON),
// indented.
func (o *Outcome) MarshalJSON() ([]byte, error) {
	b, err := json.Marshal(o.Document())
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	if err := json.Indent(&buf, b, "", "  "); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}
