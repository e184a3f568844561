package samples

import (
	"fmt"
	"image/color"
	"math"
	"math/rand"

	"tracelift/record"
)

// Layout names the arrangement of leads on the page (record.Layout).
type Layout = record.Layout

// The layouts the renderer draws.
const (
	Layout3x4R1 = record.Layout3x4R1 // 3 rows × 4 columns + one rhythm strip (lead II)
	Layout3x4R3 = record.Layout3x4R3 // 3 rows × 4 columns + three rhythm strips (II, V1, V5)
	Layout6x2   = record.Layout6x2   // limb leads left, precordial leads right
	Layout12x1  = record.Layout12x1  // every lead across the page
	Layout1x1   = record.Layout1x1   // one strip (RhythmLeads[0], default II)
)

// Layouts lists the layouts the renderer draws: record.Layouts but 3x4,
// which the bench suite does not render.
var Layouts = []Layout{Layout3x4R1, Layout3x4R3, Layout6x2, Layout12x1, Layout1x1}

// GridKind is how the millimetre grid is printed.
type GridKind int

// Grid kinds.
const (
	GridLines GridKind = iota // 1 mm and 5 mm lines
	GridDots                  // dots at 1 mm, larger dots at 5 mm crossings
	GridNone                  // plain paper
	GridMajor                 // 5 mm lines only (plain prints, many faxes)
)

// Font choices for labels and header.
const (
	FontSans      = iota // Go regular (proportional)
	FontMono             // Go mono
	FontBold             // Go bold
	FontDotMatrix        // a 7×13 bitmap font scaled up, blocky
	NumFonts
)

// Style says how a printout looks. DefaultStyle gives the commonest
// look; zero numeric fields in a Style passed to Render take those
// defaults too.
type Style struct {
	Layout      Layout
	Cabrera     bool     // limb leads in Cabrera order (aVL, I, −aVR, II, aVF, III)
	RhythmLeads []string // rhythm strips (3x4+1: [II]; 3x4+3: [II V1 V5]; 1x1: the strip's lead)

	SpeedMMPerS float64 // paper speed, default 25
	GainMMPerMV float64 // default 10
	DPI         float64 // 100..600, default 300

	PaperWMM, PaperHMM float64 // default 297 × 210 (A4 landscape)

	Grid                     GridKind
	GridColor                color.NRGBA // colour of the 5 mm lines; the 1 mm lines are a paler blend
	MinorLineMM, MajorLineMM float64     // line widths of the 1 mm and 5 mm lines
	GridOriginMM             [2]float64  // shift of the grid from the first panel's top-left 5 mm crossing
	PaperColor               color.NRGBA

	TraceWidthMM float64
	TraceColor   color.NRGBA

	MarginsMM [4]float64 // left, top, right, bottom
	Pulses    bool       // 1 mV × 200 ms calibration pulse at the left of each row
	Labels    bool       // lead names near each panel's start
	LabelPt   float64    // label size in points, default 10
	Font      int        // FontSans, FontMono, FontBold, FontDotMatrix
	Header    string     // invented text line at the top
	// Separators draws a short vertical tick where one column's lead
	// gives way to the next, as many printers do.
	Separators bool
	// SettingsForm picks how the header states speed and gain: 0
	// "25 mm/s   10 mm/mV", 1 "25mm/s  10mm/mV", 2 "10 mm/mV  25 mm/s".
	SettingsForm int

	StartS float64 // record time drawn at tracing time 0

	// The fields below widen the look; their zero values keep the
	// classic look above (pulse left with a gap, labels above the
	// baseline, short ticks, round pen).

	// PulsePlace says where the pulse stands and how it meets the trace
	// (used when Pulses is true). PulseMS is its width, default 200 ms.
	PulsePlace PulsePlace
	PulseMS    float64
	// LabelPlace says where the lead names stand.
	LabelPlace LabelPlace
	// Boundary says how one column gives way to the next when
	// Separators is true; BoundaryGapMS is the blank of BoundaryGap.
	Boundary      Boundary
	BoundaryGapMS float64
	// Pen says how the trace is inked; PenJitterMM is the standard
	// deviation of a slow wobble of the pen across the stroke, and
	// InkSpreadMM a bleed of the ink into the paper (both 0 = none).
	Pen         PenKind
	PenJitterMM float64
	InkSpreadMM float64
	// Strip draws narrow strip paper without margins: one band, the
	// grid running to every edge (with Layout1x1).
	Strip bool
	// GridBorder frames the grid rectangle with a 5 mm-line-wide border.
	GridBorder bool
	// Seed drives the pen's wobble and the thermal head's dots.
	Seed int64
}

// PulsePlace is where the 1 mV calibration pulse is printed.
type PulsePlace int

// Pulse places.
const (
	PulseGapLeft     PulsePlace = iota // left of each row; the trace starts after a gap
	PulseJoinedLeft                    // left; the trace leaves the pulse's falling edge at the baseline
	PulseGapRight                      // right end of each row, after the trace, with a gap
	PulseJoinedRight                   // right end; the trace drops to the baseline and the pulse rises from it
)

// Joined reports whether the trace runs into the pulse without a gap.
func (p PulsePlace) Joined() bool { return p == PulseJoinedLeft || p == PulseJoinedRight }

// Right reports whether the pulse stands at the right end of the row.
func (p PulsePlace) Right() bool { return p == PulseGapRight || p == PulseJoinedRight }

// LabelPlace is where the lead names are printed.
type LabelPlace int

// Label places.
const (
	LabelAbove  LabelPlace = iota // above the baseline, just after the panel's start
	LabelBelow                    // below the baseline
	LabelMargin                   // in the left margin before the row (first column), else above
	LabelInside                   // in the first millimetre of the panel, on the baseline
)

// Boundary is how a column join is marked.
type Boundary int

// Boundaries.
const (
	BoundaryTick Boundary = iota // a short vertical tick across the baseline
	BoundaryTall                 // a tick across most of the row's band
	BoundaryGap                  // the trace stops short: a blank of BoundaryGapMS
)

// PenKind is how the trace is inked.
type PenKind int

// Pens.
const (
	PenRound   PenKind = iota // round caps and joins
	PenButt                   // square ends, no rounding at the joins
	PenThermal                // a thermal head: dots on an 8 per mm lattice, one head line at a time
)

// DefaultStyle is the commonest printout: A4 landscape, 3x4+1 with a
// lead II rhythm strip, red grid, 25 mm/s, 10 mm/mV, 300 dpi.
func DefaultStyle() Style {
	return Style{
		Layout:       Layout3x4R1,
		RhythmLeads:  []string{"II"},
		SpeedMMPerS:  25,
		GainMMPerMV:  10,
		DPI:          300,
		PaperWMM:     297,
		PaperHMM:     210,
		Grid:         GridLines,
		GridColor:    color.NRGBA{230, 90, 90, 255},
		MinorLineMM:  0.08,
		MajorLineMM:  0.2,
		PaperColor:   color.NRGBA{255, 255, 255, 255},
		TraceWidthMM: 0.3,
		TraceColor:   color.NRGBA{10, 10, 10, 255},
		MarginsMM:    [4]float64{10, 12, 10, 10},
		Pulses:       true,
		Labels:       true,
		LabelPt:      10,
		Font:         FontSans,
		Header:       "Synthetic tracing · not a patient",
		Separators:   true,
	}
}

// withDefaults fills zero fields from DefaultStyle and checks ranges.
func (st Style) withDefaults() (Style, error) {
	d := DefaultStyle()
	if st.Layout == "" {
		st.Layout = d.Layout
	}
	ok := false
	for _, l := range Layouts {
		if st.Layout == l {
			ok = true
		}
	}
	if !ok {
		return st, fmt.Errorf("samples: unknown layout %q (want one of %s)", st.Layout, record.LayoutNames(Layouts))
	}
	def := func(v *float64, dv float64) {
		if *v == 0 {
			*v = dv
		}
	}
	def(&st.SpeedMMPerS, d.SpeedMMPerS)
	def(&st.GainMMPerMV, d.GainMMPerMV)
	def(&st.DPI, d.DPI)
	def(&st.PaperWMM, d.PaperWMM)
	def(&st.PaperHMM, d.PaperHMM)
	def(&st.MinorLineMM, d.MinorLineMM)
	def(&st.MajorLineMM, d.MajorLineMM)
	def(&st.TraceWidthMM, d.TraceWidthMM)
	def(&st.LabelPt, d.LabelPt)
	if st.PaperColor.A == 0 {
		st.PaperColor = d.PaperColor
	}
	if st.TraceColor.A == 0 {
		st.TraceColor = d.TraceColor
	}
	if st.GridColor.A == 0 {
		st.GridColor = d.GridColor
	}
	bad := func(v, lo, hi float64) bool { return !(v >= lo && v <= hi) }
	switch {
	case bad(st.SpeedMMPerS, 5, 200):
		return st, fmt.Errorf("samples: paper speed %v mm/s out of range 5..200", st.SpeedMMPerS)
	case bad(st.GainMMPerMV, 1, 100):
		return st, fmt.Errorf("samples: gain %v mm/mV out of range 1..100", st.GainMMPerMV)
	case bad(st.DPI, 50, 1200):
		return st, fmt.Errorf("samples: %v dpi out of range 50..1200", st.DPI)
	case bad(st.PaperWMM, 50, 1000) || bad(st.PaperHMM, 30, 1000):
		return st, fmt.Errorf("samples: paper %v × %v mm out of range", st.PaperWMM, st.PaperHMM)
	case bad(st.TraceWidthMM, 0.01, 3) || bad(st.MinorLineMM, 0, 2) || bad(st.MajorLineMM, 0, 3):
		return st, fmt.Errorf("samples: line widths out of range")
	case bad(st.StartS, 0, 1e6):
		return st, fmt.Errorf("samples: start time %v s out of range", st.StartS)
	case bad(st.LabelPt, 2, 72):
		return st, fmt.Errorf("samples: label size %v pt out of range", st.LabelPt)
	}
	for _, m := range st.MarginsMM {
		if bad(m, 0, 100) {
			return st, fmt.Errorf("samples: margin %v mm out of range", m)
		}
	}
	if px := st.PaperWMM / 25.4 * st.DPI * st.PaperHMM / 25.4 * st.DPI; px > 60e6 {
		return st, fmt.Errorf("samples: page of %.0f Mpx is too large (at most 60)", px/1e6)
	}
	if len(st.RhythmLeads) == 0 {
		switch st.Layout {
		case Layout3x4R3:
			st.RhythmLeads = []string{"II", "V1", "V5"}
		default:
			st.RhythmLeads = []string{"II"}
		}
	}
	if st.Font < 0 || st.Font >= NumFonts {
		st.Font = FontSans
	}
	def(&st.PulseMS, 200)
	def(&st.BoundaryGapMS, 40)
	switch {
	case bad(st.PulseMS, 40, 400):
		return st, fmt.Errorf("samples: pulse width %v ms out of range 40..400", st.PulseMS)
	case bad(st.BoundaryGapMS, 0, 200):
		return st, fmt.Errorf("samples: boundary gap %v ms out of range 0..200", st.BoundaryGapMS)
	case bad(st.PenJitterMM, 0, 0.5) || bad(st.InkSpreadMM, 0, 1):
		return st, fmt.Errorf("samples: pen jitter or ink spread out of range")
	case st.PulsePlace < PulseGapLeft || st.PulsePlace > PulseJoinedRight:
		return st, fmt.Errorf("samples: unknown pulse place %d", st.PulsePlace)
	case st.LabelPlace < LabelAbove || st.LabelPlace > LabelInside:
		return st, fmt.Errorf("samples: unknown label place %d", st.LabelPlace)
	case st.Boundary < BoundaryTick || st.Boundary > BoundaryGap:
		return st, fmt.Errorf("samples: unknown boundary %d", st.Boundary)
	case st.Pen < PenRound || st.Pen > PenThermal:
		return st, fmt.Errorf("samples: unknown pen %d", st.Pen)
	case st.Strip && st.Layout != Layout1x1:
		return st, fmt.Errorf("samples: strip paper holds one strip (layout 1x1), not %s", st.Layout)
	}
	if st.Strip {
		st.MarginsMM = [4]float64{}
	}
	return st, nil
}

// Grid colours seen on real paper.
var gridColors = []color.NRGBA{
	{230, 90, 90, 255},   // red
	{245, 150, 160, 255}, // pink
	{240, 150, 60, 255},  // orange
	{90, 170, 100, 255},  // green
	{100, 140, 220, 255}, // blue
	{150, 150, 150, 255}, // grey
	{200, 60, 60, 255},   // dark red
}

var traceColors = []color.NRGBA{
	{10, 10, 10, 255}, {40, 40, 40, 255}, {20, 20, 70, 255}, {0, 0, 0, 255}, {60, 30, 20, 255},
}

// Invented header lines: no real place, person or product.
var headers = []string{
	"Hillcrest Rural Health Post · demo tracing · not a patient",
	"Lakeview Community Clinic (fictional) · synthetic ECG",
	"Station 4 · training strip · invented signal",
	"Riverbend Outreach Van · test print · no patient data",
	"Northfield Teaching Ward · simulated 12-lead",
	"Unit B · rest ECG · synthetic · ID 0000",
	"",
}

// RandomStyle draws a widely varied style: layouts, paper, colours, grid
// kinds, line and trace widths, margins, grid offsets, fonts and sizes,
// header text, speed, gain and resolution (150–600 dpi).
func RandomStyle(rng *rand.Rand) Style {
	st := DefaultStyle()
	pick := func(n int) int { return rng.Intn(n) }
	u := func(lo, hi float64) float64 { return lo + (hi-lo)*rng.Float64() }
	// Layout weights: the 3x4+1 is the commonest.
	switch r := rng.Float64(); {
	case r < 0.45:
		st.Layout = Layout3x4R1
	case r < 0.6:
		st.Layout = Layout3x4R3
	case r < 0.78:
		st.Layout = Layout6x2
	case r < 0.9:
		st.Layout = Layout12x1
	default:
		st.Layout = Layout1x1
	}
	st.RhythmLeads = nil
	if st.Layout == Layout3x4R1 && rng.Float64() < 0.2 {
		st.RhythmLeads = []string{[]string{"V1", "V5", "I"}[pick(3)]}
	}
	if st.Layout == Layout1x1 {
		st.RhythmLeads = []string{[]string{"II", "V1", "V5", "I"}[pick(4)]}
	}
	st.Cabrera = rng.Float64() < 0.15
	if rng.Float64() < 0.85 {
		st.SpeedMMPerS = 25
	} else {
		st.SpeedMMPerS = 50
	}
	st.GainMMPerMV = []float64{10, 10, 10, 5, 20}[pick(5)]
	st.DPI = []float64{150, 200, 200, 300, 300, 300, 400, 600}[pick(8)]
	switch pick(4) {
	case 0:
		st.PaperWMM, st.PaperHMM = 279.4, 215.9 // US Letter landscape
	case 1:
		if st.Layout == Layout12x1 {
			st.PaperWMM, st.PaperHMM = 210, 297 // A4 portrait
		}
	}
	st.Grid = []GridKind{GridLines, GridLines, GridLines, GridDots, GridNone}[pick(5)]
	st.GridColor = gridColors[pick(len(gridColors))]
	st.MinorLineMM = u(0.03, 0.15)
	st.MajorLineMM = st.MinorLineMM + u(0.05, 0.25)
	st.GridOriginMM = [2]float64{u(-2.5, 2.5), u(-2.5, 2.5)}
	if rng.Float64() < 0.5 {
		st.GridOriginMM = [2]float64{}
	}
	if rng.Float64() < 0.2 {
		st.PaperColor = color.NRGBA{uint8(245 + pick(11)), uint8(240 + pick(16)), uint8(225 + pick(31)), 255}
	}
	st.TraceWidthMM = u(0.15, 0.6)
	st.TraceColor = traceColors[pick(len(traceColors))]
	st.MarginsMM = [4]float64{u(4, 18), u(5, 20), u(4, 18), u(4, 15)}
	st.Pulses = rng.Float64() < 0.9
	st.Labels = rng.Float64() < 0.95
	st.LabelPt = u(7, 14)
	st.Font = pick(NumFonts)
	st.Header = headers[pick(len(headers))]
	st.Separators = rng.Float64() < 0.6
	// From a value already drawn, so that the suite's other draws stay.
	st.SettingsForm = int(st.LabelPt*1000) % 3
	st.StartS = 0
	return st
}

// WidenStyle redraws the looks that printers differ in beyond what
// RandomStyle varies: where the pulse stands and whether the trace runs
// into it, its width, label places and sizes, how columns meet, the pen
// (square ends, a thermal head, a wobble, ink that spreads), a frame
// round the grid, and, for a lone strip, strip paper without margins.
// Each choice is drawn from rng, so that no single look is learned.
func WidenStyle(st Style, rng *rand.Rand) Style {
	u := func(lo, hi float64) float64 { return lo + (hi-lo)*rng.Float64() }
	switch r := rng.Float64(); {
	case r < 0.35:
		st.PulsePlace = PulseGapLeft
	case r < 0.75:
		st.PulsePlace = PulseJoinedLeft // many carts print it so (the outside pages do)
	case r < 0.88:
		st.PulsePlace = PulseGapRight
	default:
		st.PulsePlace = PulseJoinedRight
	}
	if rng.Float64() < 0.06 {
		st.Pulses = false
	}
	st.PulseMS = []float64{200, 200, 200, 200, 100, 160}[rng.Intn(6)]
	switch r := rng.Float64(); {
	case r < 0.4:
		st.LabelPlace = LabelAbove
	case r < 0.6:
		st.LabelPlace = LabelBelow
	case r < 0.8:
		st.LabelPlace = LabelMargin
	default:
		st.LabelPlace = LabelInside
	}
	if rng.Float64() < 0.5 {
		st.LabelPt = u(5, 16)
	}
	if st.LabelPlace == LabelMargin {
		// Room for "aVR" before the grid.
		st.MarginsMM[0] = math.Max(st.MarginsMM[0], 3*0.6*st.LabelPt*0.3528+2)
	}
	st.Separators = rng.Float64() < 0.75
	st.Boundary = []Boundary{BoundaryTick, BoundaryTick, BoundaryTall, BoundaryGap, BoundaryGap}[rng.Intn(5)]
	st.BoundaryGapMS = u(16, 80)
	switch r := rng.Float64(); {
	case r < 0.55:
		st.Pen = PenRound
	case r < 0.8:
		st.Pen = PenButt
	default:
		st.Pen = PenThermal
	}
	if rng.Float64() < 0.5 {
		st.TraceWidthMM = u(0.2, 0.5)
	}
	if rng.Float64() < 0.4 {
		st.PenJitterMM = u(0.005, 0.03)
	}
	if rng.Float64() < 0.3 {
		st.InkSpreadMM = u(0.03, 0.12)
	}
	st.GridBorder = rng.Float64() < 0.3
	st.Seed = rng.Int63()
	// One lined grid in six prints only its 5 mm lines. Taken from the
	// seed, not a new draw, so the rest of every case stays as it was.
	if st.Grid == GridLines && st.Seed%6 == 0 {
		st.Grid = GridMajor
	}
	if st.Layout == Layout1x1 {
		if rng.Float64() < 0.4 {
			st.RhythmLeads = []string{[]string{"II", "III", "aVF", "V1", "V2", "V5", "V6", "I", "aVL"}[rng.Intn(9)]}
		}
		if rng.Float64() < 0.6 {
			st.Strip = true
			st.PaperHMM = u(50, 80)
			st.PaperWMM = u(250, 300)
			if st.GainMMPerMV > 10 {
				st.GainMMPerMV = 10
			}
			st.Header = ""
			if rng.Float64() < 0.5 {
				st.Header = " " // the settings alone, printed inside the grid
			}
			if st.LabelPlace == LabelMargin {
				st.LabelPlace = LabelAbove // no margin to print in
			}
			if st.PaperWMM > 210 && st.Layout == Layout1x1 && st.DPI > 400 {
				st.DPI = 300
			}
		}
	}
	return st
}

// ConditionStyle adjusts a style to go with a condition: a faint green
// or blue grid for "darktable", a thermal head on tinted paper for
// "thermal"; other conditions leave it as it is.
func ConditionStyle(cond string, st Style, rng *rand.Rand) Style {
	switch cond {
	case "curled", "shadow", "chatapp", "darktable", "thermal":
		// A phone resolves no more than about 300 dpi of a whole page, and
		// a thermal head prints 8 dots per mm: render no finer than that
		// (it also keeps the bench quick).
		st.DPI = math.Min(st.DPI, 300)
	}
	switch cond {
	case "darktable":
		c := []color.NRGBA{{90, 170, 100, 255}, {100, 140, 220, 255}, {120, 190, 170, 255}}[rng.Intn(3)]
		st.GridColor = lighten(c, 0.35+0.3*rng.Float64())
		st.Grid = GridLines
		st.MinorLineMM = 0.03 + 0.04*rng.Float64()
		st.MajorLineMM = st.MinorLineMM + 0.04 + 0.08*rng.Float64()
	case "thermal":
		st.Pen = PenThermal
		st.PaperColor = color.NRGBA{uint8(240 + rng.Intn(12)), uint8(238 + rng.Intn(12)), uint8(225 + rng.Intn(20)), 255}
		st.TraceColor = []color.NRGBA{{30, 30, 35, 255}, {60, 40, 70, 255}, {20, 20, 20, 255}}[rng.Intn(3)]
	}
	return st
}
