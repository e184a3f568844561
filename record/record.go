package record

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"time"
)

// The twelve standard leads, spelled as the trade writes them.
const (
	I   = "I"
	II  = "II"
	III = "III"
	AVR = "aVR"
	AVL = "aVL"
	AVF = "aVF"
	V1  = "V1"
	V2  = "V2"
	V3  = "V3"
	V4  = "V4"
	V5  = "V5"
	V6  = "V6"
)

// Standard12 lists the standard leads in their conventional order.
var Standard12 = []string{I, II, III, AVR, AVL, AVF, V1, V2, V3, V4, V5, V6}

// Limb6 lists the six frontal-plane (limb) leads.
var Limb6 = []string{I, II, III, AVR, AVL, AVF}

// Precordial lists V1 to V6.
var Precordial = []string{V1, V2, V3, V4, V5, V6}

// CanonicalLead maps a free spelling of a lead name ("avr", "MLII", "v1",
// "ii") to the standard spelling when it is one of the twelve standard
// leads; any other name is returned trimmed and unchanged (rhythm strips
// and free names are allowed).
func CanonicalLead(name string) string {
	n := strings.TrimSpace(name)
	u := strings.ToUpper(n)
	switch u {
	case "I", "II", "III", "V1", "V2", "V3", "V4", "V5", "V6":
		return u
	case "AVR":
		return AVR
	case "AVL":
		return AVL
	case "AVF":
		return AVF
	}
	return n
}

// IsStandard reports whether name is one of the twelve standard leads.
func IsStandard(name string) bool {
	for _, l := range Standard12 {
		if l == name {
			return true
		}
	}
	return false
}

// Signal is one lead sampled at a fixed rate.
type Signal struct {
	Lead   string    `json:"lead"`
	RateHz float64   `json:"rate_hz"`
	StartS float64   `json:"start_s"` // time of MV[0] on the tracing's clock
	MV     []float64 `json:"-"`       // samples in mV; NaN marks a gap
}

// Len returns the number of samples.
func (s *Signal) Len() int { return len(s.MV) }

// EndS returns the time just after the last sample.
func (s *Signal) EndS() float64 { return s.StartS + float64(len(s.MV))/s.RateHz }

// At returns the sample nearest to time t (seconds on the tracing's clock)
// and whether t falls inside the signal and is not a gap.
func (s *Signal) At(t float64) (float64, bool) {
	i := int(math.Round((t - s.StartS) * s.RateHz))
	if i < 0 || i >= len(s.MV) || math.IsNaN(s.MV[i]) {
		return math.NaN(), false
	}
	return s.MV[i], true
}

// Clone returns a deep copy.
func (s *Signal) Clone() Signal {
	c := *s
	c.MV = append([]float64(nil), s.MV...)
	return c
}

// Provenance says where a record came from.
type Provenance struct {
	SourceFile  string  `json:"source_file,omitempty"`
	ImageSHA256 string  `json:"image_sha256,omitempty"`
	PxPerMMX    float64 `json:"px_per_mm_x,omitempty"`
	PxPerMMY    float64 `json:"px_per_mm_y,omitempty"`
	GainMMPerMV float64 `json:"gain_mm_per_mv,omitempty"`
	SpeedMMPerS float64 `json:"speed_mm_per_s,omitempty"`
	Layout      string  `json:"layout,omitempty"`
	ScaleSource string  `json:"scale_source,omitempty"` // grid, pulse, user, file
	GainFrom    string  `json:"gain_from,omitempty"`    // pulse, row_pulses, printed, stated, assumed
	SpeedFrom   string  `json:"speed_from,omitempty"`   // pulse, printed, stated, assumed
	// Adjusted lists, in order, the corrections of the page's geometry
	// and settings made once its traces were found (half_turn,
	// straighten, span_scale, row_pulse_gain, gain_assumed,
	// printed_settings, by_hand).
	Adjusted []string `json:"adjusted,omitempty"`
	Software string   `json:"software,omitempty"`
}

// Point is a point of a freehand correction, in tracing time and mV.
type Point struct {
	TS float64 `json:"t_s"`
	MV float64 `json:"mv"`
}

// Correction kinds.
const (
	CorrShift    = "shift"    // a stretch moved up or down by OffsetMV
	CorrRedraw   = "redraw"   // a stretch replaced by a freehand polyline
	CorrErase    = "erase"    // a stretch set to a gap
	CorrBaseline = "baseline" // a lead's baseline moved by OffsetMV
	CorrAssign   = "assign"   // a lead renamed (Lead -> NewLead)
	CorrBox      = "box"      // a panel's box moved or resized (handled by the digitizer)
	// CorrDrawnPanel is a panel the reader missed, drawn by hand: Box is
	// where its trace lies, Lead its name. The digitizer traces it.
	CorrDrawnPanel = "drawn_panel"
)

// Correction is one hand edit. Applying the list in order to the raw
// digitized record reproduces the corrected record exactly.
type Correction struct {
	Kind     string    `json:"kind"`
	Lead     string    `json:"lead"`
	StartS   float64   `json:"start_s,omitempty"`
	EndS     float64   `json:"end_s,omitempty"`
	OffsetMV float64   `json:"offset_mv,omitempty"`
	Points   []Point   `json:"points,omitempty"`
	NewLead  string    `json:"new_lead,omitempty"`
	Box      []float64 `json:"box,omitempty"` // x0,y0,x1,y1 in image px
	Note     string    `json:"note,omitempty"`
	At       time.Time `json:"at,omitzero"`
}

// Annotation marks a time on the record (a beat, a user's note).
type Annotation struct {
	TS   float64 `json:"t_s"`
	Code string  `json:"code"` // "N" normal beat, "V" premature ventricular, "note", ...
	Text string  `json:"text,omitempty"`
}

// Record is a digitized or read ECG.
type Record struct {
	Name        string       `json:"name"`
	Signals     []Signal     `json:"signals"`
	Provenance  Provenance   `json:"provenance"`
	Corrections []Correction `json:"corrections,omitempty"`
	Annotations []Annotation `json:"annotations,omitempty"`
}

// ErrNoLead is returned when a requested lead is not in the record.
var ErrNoLead = errors.New("record: lead not found")

// Lead returns the signal of the named lead (spelling normalised by
// CanonicalLead), or nil.
func (r *Record) Lead(name string) *Signal {
	n := CanonicalLead(name)
	for i := range r.Signals {
		if r.Signals[i].Lead == n {
			return &r.Signals[i]
		}
	}
	return nil
}

// Leads returns the lead names in record order.
func (r *Record) Leads() []string {
	out := make([]string, len(r.Signals))
	for i, s := range r.Signals {
		out[i] = s.Lead
	}
	return out
}

// DurationS returns the time from the earliest start to the latest end.
func (r *Record) DurationS() float64 {
	if len(r.Signals) == 0 {
		return 0
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for i := range r.Signals {
		lo = math.Min(lo, r.Signals[i].StartS)
		hi = math.Max(hi, r.Signals[i].EndS())
	}
	return hi - lo
}

// Clone returns a deep copy.
func (r *Record) Clone() *Record {
	c := *r
	c.Signals = make([]Signal, len(r.Signals))
	for i := range r.Signals {
		c.Signals[i] = r.Signals[i].Clone()
	}
	c.Corrections = append([]Correction(nil), r.Corrections...)
	c.Annotations = append([]Annotation(nil), r.Annotations...)
	return &c
}

// Validate checks the record is usable: at least one lead, positive
// finite rates, no duplicate names, no infinite samples.
func (r *Record) Validate() error {
	if len(r.Signals) == 0 {
		return errors.New("record: no leads")
	}
	seen := map[string]bool{}
	for i := range r.Signals {
		s := &r.Signals[i]
		if s.Lead == "" {
			return fmt.Errorf("record: lead %d has no name", i)
		}
		if seen[s.Lead] {
			return fmt.Errorf("record: lead %s appears twice", s.Lead)
		}
		seen[s.Lead] = true
		if !(s.RateHz > 0) || math.IsInf(s.RateHz, 0) {
			return fmt.Errorf("record: lead %s: bad sample rate %v", s.Lead, s.RateHz)
		}
		if math.IsNaN(s.StartS) || math.IsInf(s.StartS, 0) {
			return fmt.Errorf("record: lead %s: bad start time", s.Lead)
		}
		for _, v := range s.MV {
			if math.IsInf(v, 0) {
				return fmt.Errorf("record: lead %s: infinite sample", s.Lead)
			}
		}
	}
	return nil
}

// Resample returns the signal resampled to rate hz by linear
// interpolation on the same clock (AtIndex); gaps stay gaps, and past the
// last sample (a finer rate's last half period) its value holds.
func (s *Signal) Resample(hz float64) Signal {
	if hz == s.RateHz || len(s.MV) == 0 {
		return s.Clone()
	}
	dur := float64(len(s.MV)) / s.RateHz
	n := int(math.Round(dur * hz))
	out := Signal{Lead: s.Lead, RateHz: hz, StartS: s.StartS, MV: make([]float64, n)}
	for i := range out.MV {
		x := float64(i) * s.RateHz / hz
		if x > float64(len(s.MV)-1) {
			out.MV[i] = s.MV[len(s.MV)-1]
			continue
		}
		out.MV[i] = s.AtIndex(x)
	}
	return out
}

// AtIndex is the signal at the fractional sample index x (x = (t −
// StartS)·RateHz) by linear interpolation between the two neighbouring
// samples: the one resampling rule of the project's signals (Resample,
// the accuracy scores, digitize's traces onto the record's grid, the
// median beat's template). NaN outside [0, len−1] and next to a gap.
func (s *Signal) AtIndex(x float64) float64 {
	if !(x >= 0) || x > float64(len(s.MV)-1) {
		return math.NaN()
	}
	j := int(x)
	if j >= len(s.MV)-1 {
		return s.MV[len(s.MV)-1]
	}
	f := x - float64(j)
	return s.MV[j]*(1-f) + s.MV[j+1]*f
}

// Window cuts durS seconds of the named leads out of r, starting offS
// seconds into each, resampled to hz, on a clock that starts at 0. A
// window running past a lead's end is moved back to end with it. Leads r
// lacks are left out.
func (r *Record) Window(leads []string, hz, offS, durS float64) *Record {
	out := &Record{Name: r.Name, Provenance: r.Provenance}
	n := int(math.Round(durS * hz))
	for _, l := range leads {
		s := r.Lead(l)
		if s == nil {
			continue
		}
		rs := s.Resample(hz)
		i0 := int(offS * hz)
		if i0+n > len(rs.MV) {
			i0 = len(rs.MV) - n
		}
		if i0 < 0 {
			i0 = 0
		}
		i1 := min(i0+n, len(rs.MV))
		out.Signals = append(out.Signals, Signal{Lead: s.Lead, RateHz: hz, MV: append([]float64(nil), rs.MV[i0:i1]...)})
	}
	return out
}
