package model

import (
	"context"
	"image"

	"tracelift/record"
)

// Caution is shown beside every measurement (project rule; the same words
// as the measurement engine's).
const Caution = "Not a diagnostic device; every measurement is to be reviewed by a qualified clinician; local protocols and licensed practice come first."

// Source names what to read: a file on disk, or bytes with a name (the
// embedded demo printouts).
type Source struct {
	Path string // a file on disk; empty for in-memory data
	Name string // shown in the title; defaults to the file's base name
	Data []byte // the file's bytes when Path is empty
}

// IsFile reports whether the source is a file on disk (and so gets a
// project file beside it).
func (s Source) IsFile() bool { return s.Path != "" }

// Settings are the user's overrides of what the reader found. The zero
// value keeps everything automatic. They are saved in the project file.
type Settings struct {
	// PxPerMM is the scale in px per mm of the original image; 0 = found
	// from the grid or the calibration pulse.
	PxPerMM     float64 `json:"px_per_mm,omitempty"`
	GainMMPerMV float64 `json:"gain_mm_per_mv,omitempty"` // 0 = as found (10 when nothing says otherwise)
	SpeedMMPerS float64 `json:"speed_mm_per_s,omitempty"` // 0 = as found (25 when nothing says otherwise)
	Layout      string  `json:"layout,omitempty"`         // "" = found automatically
	Page        int     `json:"page,omitempty"`           // 0-based page of a multi-page TIFF or PDF
	// QuarterTurns turns the picture clockwise before it is read (0..3);
	// Mirror then flips it left to right (a sideways fax, a scan through
	// the back of the sheet).
	QuarterTurns int  `json:"quarter_turns,omitempty"`
	Mirror       bool `json:"mirror,omitempty"`
}

// Panel is one drawn lead on the printout as the model shows it.
type Panel struct {
	Lead      string     // printed name as read ("II", "-aVR"); after reassignments in PanelViews
	Row, Col  int        // position in the layout grid
	Rhythm    bool       // a long strip under the grid
	Box       [4]float64 // x0, y0, x1, y1 in rectified px
	BaselineY float64    // y of 0 mV in rectified px
	T0S, T1S  float64    // time window the panel shows
	Drawn     bool       // drawn by hand (a drawn_panel correction), not found by the reader
}

// Analysis is what reading a printout gives: the picture, its scale, the
// panels and the raw (uncorrected) record. Backend holds whatever else the
// pipeline needs to re-derive signals or export (pixel traces, the page).
type Analysis struct {
	Name        string
	ImageSHA256 string
	Image       image.Image // the rectified printout the overlays are drawn on
	PxPerMM     float64     // scale of Image
	// ImagePxPerMM is the scale along the time axis of the original image,
	// the unit of Settings.PxPerMM.
	ImagePxPerMM float64
	GainMMPerMV  float64
	SpeedMMPerS  float64
	ScaleSource  string // grid, pulse, user
	ScaleConf    float64
	Layout       string
	Layouts      []string // layouts the user may choose
	Panels       []Panel
	Quality      map[string]float64 // per printed lead, 0..1
	Raw          *record.Record
	Warnings     []string
	// LayoutNote says in plain words why the layout given by hand does
	// not match what the page shows ("" when it does or was found).
	LayoutNote string
	PageCount  int // pages in the file (1 for a plain image)
	Handle     any // backend's own state
}

// Progress reports the stage being worked on and the fraction done (0..1).
type Progress func(stage string, frac float64)

// Backend is the pipeline as the model sees it. The real one wraps
// package pipeline; tests use a fake.
type Backend interface {
	// Analyze reads the source with the given settings. It honours ctx.
	Analyze(ctx context.Context, src Source, s Settings, p Progress) (*Analysis, error)
	// Resignal re-derives the raw record from the pixel traces after
	// panels were moved or resized; panels beyond the analysis's own are
	// drawn by hand and traced inside their boxes. It returns the record
	// and the panels as the digitizer reads them (a drawn panel with its
	// time window and baseline).
	Resignal(a *Analysis, panels []Panel) (*record.Record, []Panel, error)
	// Measure measures a record. quality holds per-lead confidences.
	Measure(rec *record.Record, quality map[string]float64) (*Summary, error)
	// Export writes what job holds (the screen's corrected record, panels
	// and findings) in the chosen formats into job.Dir as <stem>.<ext>.
	Export(a *Analysis, job ExportJob) ([]string, error)
}

// ExportJob is what an export writes: exactly what the screen shows.
type ExportJob struct {
	Record     *record.Record // corrected
	Panels     []Panel        // where the boxes are now (the reading's order)
	Summary    *Summary       // measured after the corrections; nil when not measured
	MeasureErr error          // why not
	Dir, Stem  string
	Formats    []string
}

// Value is one measurement with its uncertainty (NaN = not measured).
type Value struct {
	Key   string  // stable name, as in the JSON output ("heart_rate_bpm", "qrs")
	Label string  // shown to the user
	Unit  string  // "bpm", "ms", "°"
	V     float64 // the value
	SD    float64 // its uncertainty (half the 90 % interval where the engine gives one), NaN when unknown
}

// Summary is what the findings view shows.
type Summary struct {
	Values      []Value
	QRSAxisDeg  float64 // NaN when not measured; the same numbers are in Values
	PAxisDeg    float64
	TAxisDeg    float64
	AxisClass   string // normal, left, right, extreme
	AxisMethods []string
	Transition  string
	Rhythm      string
	Flags       []string
	Caution     string
	Detail      any // the engine's own findings, for export
	// Verdict is the page's verdict in words ("read with care"),
	// VerdictLevel its code (ready, care, not_readable), VerdictReasons
	// the reasons with what to do; "" when no page was read.
	Verdict        string
	VerdictLevel   string
	VerdictReasons []string
}

// Get returns the value with the given key.
func (s *Summary) Get(key string) (Value, bool) {
	if s == nil {
		return Value{}, false
	}
	for _, v := range s.Values {
		if v.Key == key {
			return v, true
		}
	}
	return Value{}, false
}
