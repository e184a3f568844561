package report

import (
	"fmt"
	"math"
	"strings"
)

// Scales of the re-plotted leads (common practice for a resting ECG).
const (
	SpeedMMPerS = 25.0 // paper speed
	GainMMPerMV = 10.0 // amplitude scale
	MinorMM     = 1.0  // small grid square
	MajorMM     = 5.0  // large grid square
)

// Fixed sizes of the lead block, in mm. The block is 255 mm wide: 5 mm for
// the 1 mV calibration step at the head of each row, then 10 s at 25 mm/s.
// Four rows (three of the 3×4 block and the rhythm strip) of 27.5 mm fill
// 110 mm; the 110 × 255 mm block fits A4 and US Letter in landscape with
// room for the header above and the findings below.
const (
	pulseMM   = 5.0
	cellS     = 2.5  // seconds per cell of the 3×4 block
	stripS    = 10.0 // seconds of the rhythm strip
	gridWMM   = pulseMM + stripS*SpeedMMPerS
	rowMM     = 27.5
	gridRows  = 4
	gridHMM   = rowMM * gridRows
	baseFrac  = 0.62 // baseline position within a row, from its top (QRS mostly upward)
	mmPerInch = 25.4
	ptPerInch = 72.0
)

// Paper is a page size, landscape.
type Paper struct {
	Name     string  // "a4" or "letter"
	WidthMM  float64 // landscape width
	HeightMM float64 // landscape height
	fpdfSize string
}

// Papers supported. A4 is 210 × 297 mm (ISO 216) and US Letter is
// 8.5 × 11 in (ANSI/ASME Y14.1); both are laid out landscape so that 10 s
// at 25 mm/s fits on one line.
var Papers = map[string]Paper{
	"a4":     {Name: "a4", WidthMM: 297, HeightMM: 210, fpdfSize: "A4"},
	"letter": {Name: "letter", WidthMM: 11 * mmPerInch, HeightMM: 8.5 * mmPerInch, fpdfSize: "Letter"},
}

// PaperByName returns the named paper; "" is A4. Names are case-blind.
func PaperByName(name string) (Paper, error) {
	n := strings.ToLower(strings.TrimSpace(name))
	if n == "" {
		n = "a4"
	}
	if n == "us-letter" || n == "usletter" {
		n = "letter"
	}
	p, ok := Papers[n]
	if !ok {
		return Paper{}, fmt.Errorf("report: unknown paper %q (choose a4 or letter)", name)
	}
	return p, nil
}

// pageLayout places the parts of page 1, in mm from the top-left corner.
type pageLayout struct {
	paper        Paper
	margin       float64
	gridX, gridY float64 // top-left corner of the lead block
	findingsY    float64 // top of the findings band
	cautionY     float64 // top of the caution box
	cautionH     float64
}

func newLayout(p Paper) pageLayout {
	l := pageLayout{paper: p, margin: 7}
	l.gridX = math.Round((p.WidthMM-gridWMM)/2*10) / 10
	l.gridY = 26.5
	l.cautionH = 8
	l.cautionY = p.HeightMM - 6 - l.cautionH
	l.findingsY = l.gridY + gridHMM + 7
	return l
}

// gridLines returns the positions of grid lines from a to a+length every
// step mm, counted from a so that the first line lies on a. Positions are
// computed by multiplication, not accumulation, so the last line carries no
// rounding drift.
func gridLines(a, length, step float64) []float64 {
	n := int(math.Floor(length/step + 1e-9))
	out := make([]float64, n+1)
	for i := range out {
		out[i] = a + float64(i)*step
	}
	return out
}

// isMajor reports whether line i of the minor grid is also a major line.
func isMajor(i int) bool { return i%int(MajorMM/MinorMM) == 0 }

// mmToPt converts millimetres to PDF points.
func mmToPt(mm float64) float64 { return mm / mmPerInch * ptPerInch }

// timeToX gives the page x of tracing time t in a stretch that starts at
// t0 and is drawn from x0.
func timeToX(x0, t0, t float64) float64 { return x0 + (t-t0)*SpeedMMPerS }

// mvToY gives the page y of an amplitude drawn about a baseline at y0
// (y grows downwards, so positive mV goes up).
func mvToY(y0, mv float64) float64 { return y0 - mv*GainMMPerMV }

// cellLeads is the 3×4 arrangement: columns of three leads, 2.5 s each
// (common practice for the standard lead order).
var cellLeads = [4][3]string{
	{"I", "II", "III"},
	{"aVR", "aVL", "aVF"},
	{"V1", "V2", "V3"},
	{"V4", "V5", "V6"},
}
