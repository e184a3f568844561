package pipeline

import (
	"encoding/json"

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
	RotationDeg float64       `json:"rotation_deg"`
	Turned      int           `json:"quarter_turns"`
	Source      string        `json:"source"`
	Confidence  float64       `json:"confidence"`
	Pulses      []calib.Pulse `json:"pulses,omitempty"`
	Warnings    []string      `json:"warnings,omitempty"`
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
// findings of the measurement engine at the top level.
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
	Leads       []string                        `json:"leads"`
	Corrections []record.Correction             `json:"corrections,omitempty"`
	MeasureErr  string                          `json:"measure_error,omitempty"`
	TimingsMS   map[string]float64              `json:"timings_ms"`
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
			GainMMPerMV: c.GainMMPerMV, SpeedMMPerS: c.SpeedMMPerS,
			RotationDeg: c.RotationDeg, Turned: c.Turned,
			Source: c.Source, Confidence: c.Confidence,
			Pulses: c.Pulses, Warnings: c.Warnings,
		}
	}
	if dr := o.Digitized; dr != nil {
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

// MarshalJSON writes the document with the findings' fields merged in at
// the top level (heart_rate_bpm, intervals_ms, axis, transition, flags…),
// so digitize and measure outputs share one shape.
func (o *Outcome) MarshalJSON() ([]byte, error) {
	base, err := json.Marshal(o.Document())
	if err != nil {
		return nil, err
	}
	if o.Findings == nil {
		return base, nil
	}
	fb, err := json.Marshal(o.Findings)
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
	return json.MarshalIndent(m, "", "  ")
}
