package report

import (
	"errors"
	"fmt"
	"image"
	"math"

	"tracelift/record"
)

// Summary is everything the printed page shows, already chosen and
// formatted. Render draws it as it is; it computes nothing clinical.
type Summary struct {
	Title string // page title; "" = "ECG summary"

	// Header holds the fields the user fills in (name, identifier, date of
	// birth, recorded at, reviewed by...). They are printed as given and
	// stay in the file the user writes; an empty value prints a blank line
	// to write on by hand.
	Header []Field

	// Facts are short technical lines printed under the header: the
	// source file, the scale and where it came from, the software.
	Facts []string

	// Record holds the leads to re-plot, in mV on the tracing clock.
	Record *record.Record
	// RhythmLead is the lead drawn across the full width under the 3×4
	// block; "" picks II, else the longest lead.
	RhythmLead string

	Measurements []Row  // heart rate, intervals, QTc...
	Axes         []Axis // frontal axes (QRS, P, T) in degrees
	Category     string // the QRS axis category in words
	Transition   string // the precordial transition, e.g. "V3"
	Flags        []string
	// Verdict is the page's verdict in words ("read with care"),
	// VerdictLevel its code (ready, care, not_readable) and
	// VerdictReasons the reasons with what to do; "" draws no band.
	Verdict        string
	VerdictLevel   string
	VerdictReasons []string
	Quality        []Quality // per-lead quality figures
	QualityNotes   []string  // lead-law checks, places to check by hand
	Caution        string    // required; printed on every page

	// Source is the image the leads were traced from (page 2), and
	// Overlay the traced leads drawn over it, in Source's own pixel
	// coordinates (x right, y down; pixel (x, y) covers [x, x+1) ×
	// [y, y+1), so Bounds().Min is the top-left edge). Page 2 is left out
	// when Source is nil.
	Source  image.Image
	Overlay []Polyline
}

// Field is one header entry.
type Field struct {
	Label, Value string
}

// Row is one measurement line: "QRS  96 ± 6 ms".
type Row struct {
	Name        string // "QRS duration"
	Value       string // "96" (empty when not measured)
	Uncertainty string // "6" (empty when unknown)
	Unit        string // "ms"
	Note        string // short remark ("Bazett"), optional
}

// Axis is one frontal-plane axis drawn on the hexaxial diagram.
type Axis struct {
	Name         string  // "QRS", "P", "T"
	Deg          float64 // NaN when not measured
	PlusMinusDeg float64 // NaN or 0 when unknown
}

// Quality is one lead's quality figure.
type Quality struct {
	Lead       string
	Confidence float64 // 0..1, NaN when unknown
	Note       string
}

// Polyline is a traced lead on the source image; a NaN coordinate breaks
// the line.
type Polyline struct {
	Lead string
	X, Y []float64
}

// ErrNoCaution is returned when a Summary carries measurements but no
// caution text.
var ErrNoCaution = errors.New("report: the summary has no caution text")

// Validate checks the summary can be drawn: a record with at least one
// lead, a caution, finite-or-NaN axes, overlay coordinates of equal
// lengths.
func (s *Summary) Validate() error {
	if s == nil {
		return errors.New("report: no summary")
	}
	if s.Record == nil || len(s.Record.Signals) == 0 {
		return errors.New("report: the summary has no leads to draw")
	}
	if err := s.Record.Validate(); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	if s.Caution == "" {
		return ErrNoCaution
	}
	for _, a := range s.Axes {
		if math.IsInf(a.Deg, 0) || math.IsInf(a.PlusMinusDeg, 0) {
			return fmt.Errorf("report: axis %s is infinite", a.Name)
		}
	}
	for _, p := range s.Overlay {
		if len(p.X) != len(p.Y) {
			return fmt.Errorf("report: overlay of lead %s has %d x and %d y values", p.Lead, len(p.X), len(p.Y))
		}
	}
	if s.Source != nil {
		if b := s.Source.Bounds(); b.Dx() <= 0 || b.Dy() <= 0 {
			return errors.New("report: the source image is empty")
		}
	}
	return nil
}

// FormatValue formats a measured value and its uncertainty with the given
// number of decimals; NaN gives "" so the row prints as not measured.
func FormatValue(v, pm float64, decimals int) (value, uncertainty string) {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "", ""
	}
	value = fmt.Sprintf("%.*f", decimals, v)
	if pm > 0 && !math.IsInf(pm, 0) {
		uncertainty = fmt.Sprintf("%.*f", decimals, pm)
	}
	return value, uncertainty
}
