package report

import (
	"fmt"
	"io"
	"math"
	"strings"

	"github.com/go-pdf/fpdf"

	"tracelift/compare"
)

// The comparison page (landscape): on the left the two representative
// beats of each lead drawn over each other at true scale (25 mm/s,
// 10 mm/mV, both QRS onsets at one time), on the right the table of
// changes with their uncertainties, at the foot the caution.
const (
	cmpBoxW   = (300 + 600) / 1000.0 * SpeedMMPerS // the beats' span, 900 ms
	cmpBoxH   = 30.0                               // 3 mV
	cmpBaseMM = 17.0                               // baseline from the box's top
	cmpCols   = 3
	cmpGapMM  = 2.0
)

// colBefore is the earlier tracing's trace; the current one takes
// colOverlay.
var colBefore = rgb{20, 32, 52}

// ComparePDF draws the comparison r on one page of paper ("a4" or
// "letter").
func ComparePDF(w io.Writer, r *compare.Result, paper string) error {
	if r == nil {
		return fmt.Errorf("report: no comparison to draw")
	}
	p, err := PaperByName(paper)
	if err != nil {
		return err
	}
	pdf := fpdf.New("L", "mm", p.fpdfSize, "")
	pdf.SetAutoPageBreak(false, 0)
	pdf.SetMargins(0, 0, 0)
	pdf.SetCatalogSort(true)
	pdf.SetTitle("ECG comparison", true)
	pdf.SetCreator("tracelift", true)
	pdf.SetLineCapStyle("round")
	pdf.SetLineJoinStyle("round")
	c := &canvas{pdf: pdf, tr: codePage(pdf.UnicodeTranslatorFromDescriptor("")), l: newLayout(p)}
	pdf.AddPage()
	m := 8.0
	// Header.
	c.color(colAccent)
	c.font("B", 14)
	c.text(m, m+5, "Comparison of two tracings", 'L')
	c.font("", 7.5)
	c.color(colBefore)
	c.text(m, m+10, c.fit("A (earlier, dark): "+sideText(r.Before), 130), 'L')
	c.color(colOverlay)
	c.text(m, m+13.5, c.fit("B (current, blue): "+sideText(r.After), 130), 'L')

	// Caution box at the top, before any number.
	cx := m + 134
	cw := p.WidthMM - m - cx
	c.fill(colCaution)
	c.draw(colP)
	c.pdf.SetLineWidth(0.25)
	c.pdf.Rect(cx, m, cw, 14, "DF")
	c.font("B", 7)
	c.color(colText)
	rest := r.Caution
	for i := 0; i < 3 && rest != ""; i++ {
		var line string
		line, rest = c.wrap(rest, cw-4)
		c.text(cx+2, m+4+float64(i)*3.4, line, 'L')
	}

	// Beats.
	y0 := m + 20.0
	c.heading(m, y0, "beats: A dark, B blue")
	c.font("", 6)
	c.color(colMuted)
	c.text(m, y0+3, "QRS onsets at one time; 25 mm/s, 10 mm/mV", 'L')
	y0 += 5
	for i, bp := range r.Beats {
		col, row := i%cmpCols, i/cmpCols
		x := m + float64(col)*(cmpBoxW+cmpGapMM)
		y := y0 + float64(row)*(cmpBoxH+cmpGapMM)
		if y+cmpBoxH > p.HeightMM-14 {
			break
		}
		c.beatBox(x, y, bp, alignmentOf(r, bp.Lead))
	}

	// Table of changes.
	tx := m + cmpCols*(cmpBoxW+cmpGapMM) + 2
	c.changeTable(r, tx, y0-5, p.WidthMM-m-tx, p.HeightMM-12)

	c.font("", 6.5)
	c.color(colMuted)
	c.text(m, p.HeightMM-5, "tracelift comparison; under each beat: B's shift against A, its gain and the correlation. Thresholds and their sources are listed in the JSON written beside this page.", 'L')
	if err := pdf.Error(); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	if err := pdf.Output(w); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}

func sideText(s compare.Side) string {
	kind := "record file"
	if s.Digitized {
		kind = "digitized picture"
	}
	return s.Label + " (" + kind + ")"
}

func alignmentOf(r *compare.Result, lead string) *compare.Alignment {
	for i := range r.Alignment {
		if r.Alignment[i].Lead == lead {
			return &r.Alignment[i]
		}
	}
	return nil
}

// beatBox draws one lead's two beats on a millimetre grid at true scale.
func (c *canvas) beatBox(x, y float64, bp compare.BeatPair, al *compare.Alignment) {
	c.pdf.SetLineWidth(lwMinor)
	c.draw(colMinor)
	for mm := 0.0; mm <= cmpBoxW+1e-9; mm += MinorMM {
		c.pdf.Line(x+mm, y, x+mm, y+cmpBoxH)
	}
	for mm := 0.0; mm <= cmpBoxH+1e-9; mm += MinorMM {
		c.pdf.Line(x, y+mm, x+cmpBoxW, y+mm)
	}
	c.pdf.SetLineWidth(lwMajor)
	c.draw(colMajor)
	for mm := 0.0; mm <= cmpBoxW+1e-9; mm += MajorMM {
		c.pdf.Line(x+mm, y, x+mm, y+cmpBoxH)
	}
	for mm := 0.0; mm <= cmpBoxH+1e-9; mm += MajorMM {
		c.pdf.Line(x, y+mm, x+cmpBoxW, y+mm)
	}
	base := y + cmpBaseMM
	for _, tr := range []struct {
		mv  []float64
		col rgb
	}{{bp.A, colBefore}, {bp.B, colOverlay}} {
		c.draw(tr.col)
		c.pdf.SetLineWidth(lwTrace)
		var pts [][2]float64
		flush := func() {
			c.polyline(pts)
			pts = pts[:0]
		}
		for k, v := range tr.mv {
			t := (bp.T0MS + float64(k)*bp.StepMS + 300) / 1000
			yy := base - v*GainMMPerMV
			if math.IsNaN(v) || yy < y || yy > y+cmpBoxH {
				flush()
				continue
			}
			pts = append(pts, [2]float64{x + t*SpeedMMPerS, yy})
		}
		flush()
	}
	c.font("B", 7.5)
	c.color(colText)
	c.text(x+1, y+3, bp.Lead, 'L')
	if al != nil {
		c.font("", 5.5)
		c.color(colMuted)
		c.text(x+cmpBoxW-0.5, y+cmpBoxH-0.8, fmt.Sprintf("%+.0f ms  x%.2f  r %.2f", al.ShiftMS, al.Gain, al.Corr), 'R')
	}
}

// changeTable lists the raised changes, then the other changes beyond
// their uncertainty, then how many stayed within it, then the notes.
func (c *canvas) changeTable(r *compare.Result, x, y, w, yMax float64) {
	c.heading(x, y, fmt.Sprintf("changes raised: %d", r.Raised))
	y += 4
	line := func(s string, style string, col rgb) bool {
		if y > yMax {
			return false
		}
		c.font(style, 6.3)
		c.color(col)
		rest := strings.ReplaceAll(s, "→", "->")
		for rest != "" && y <= yMax {
			var l string
			l, rest = c.wrap(rest, w)
			c.text(x, y, l, 'L')
			y += 2.9
		}
		return true
	}
	if r.Exchange != nil {
		line("Likely recording difference, not a change of the heart: "+r.Exchange.Text+"; B is compared with it undone.", "B", colP)
		y += 1
	}
	var raised, beyond []compare.Change
	within, unmeasured := 0, 0
	for _, ch := range r.Changes {
		switch {
		case ch.Raised:
			raised = append(raised, ch)
		case ch.Beyond:
			beyond = append(beyond, ch)
		case ch.Delta.OK():
			within++
		default:
			unmeasured++
		}
	}
	if len(raised) == 0 {
		line("None: no change exceeds both its uncertainty and the threshold for a change worth attention.", "", colText)
	}
	for _, ch := range raised {
		kind := strings.ReplaceAll(ch.Kind, "_", " ")
		line("! "+kind+": "+ch.Message, "B", colText)
	}
	y += 1.5
	if len(beyond) > 0 && y < yMax {
		c.heading(x, y, "beyond the uncertainty, under the threshold or explained")
		y += 4
		for _, ch := range beyond {
			if !line(ch.Message, "", colText) {
				break
			}
		}
	}
	y += 1.5
	line(fmt.Sprintf("%d further items within their uncertainty; %d not measured on both tracings. Uncertainties are 90 %% half-widths from both sides (beat-to-beat spread plus an allowance for digitization).", within, unmeasured), "I", colMuted)
	for _, n := range r.Notes {
		line("Note: "+n, "I", colMuted)
	}
	if r.GainFactor.OK() {
		line(fmt.Sprintf("Median gain of B against A over the leads: %.2f.", float64(r.GainFactor)), "I", colMuted)
	}
}
