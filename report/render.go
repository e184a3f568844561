package report

import (
	"fmt"
	"io"
	"math"
	"strings"

	"github.com/go-pdf/fpdf"

	"tracelift/record"
)

// rgb is a colour of the page's palette.
type rgb struct{ r, g, b int }

// The palette: a quiet sage-teal grid under deep ink-blue traces, one
// teal accent for headings, and three distinct hues for the axes.
var (
	colMinor   = rgb{214, 231, 226}
	colMajor   = rgb{153, 192, 184}
	colTrace   = rgb{20, 32, 52}
	colText    = rgb{30, 40, 48}
	colMuted   = rgb{110, 122, 128}
	colAccent  = rgb{28, 96, 104}
	colSector  = rgb{226, 240, 234}
	colCaution = rgb{252, 246, 228}
	colQRS     = rgb{20, 32, 52}
	colP       = rgb{205, 120, 20}
	colT       = rgb{125, 70, 170}
	colOverlay = rgb{0, 150, 215}
)

// Line widths in mm.
const (
	lwMinor = 0.06
	lwMajor = 0.18
	lwTrace = 0.28
)

// canvas wraps an fpdf document with the page's helpers.
type canvas struct {
	pdf *fpdf.Fpdf
	tr  func(string) string
	l   pageLayout
}

func (c *canvas) draw(k rgb)  { c.pdf.SetDrawColor(k.r, k.g, k.b) }
func (c *canvas) fill(k rgb)  { c.pdf.SetFillColor(k.r, k.g, k.b) }
func (c *canvas) color(k rgb) { c.pdf.SetTextColor(k.r, k.g, k.b) }

// font sets Helvetica in style ("", "B", "I") at size pt.
func (c *canvas) font(style string, pt float64) { c.pdf.SetFont("Helvetica", style, pt) }

// text writes s with its baseline at y; align is 'L', 'C' or 'R' about x.
func (c *canvas) text(x, y float64, s string, align byte) {
	s = c.tr(s)
	w := c.pdf.GetStringWidth(s)
	switch align {
	case 'C':
		x -= w / 2
	case 'R':
		x -= w
	}
	c.pdf.Text(x, y, s)
}

// fit shortens s with an ellipsis until it is at most w mm wide.
func (c *canvas) fit(s string, w float64) string {
	if c.pdf.GetStringWidth(c.tr(s)) <= w {
		return s
	}
	r := []rune(s)
	for len(r) > 1 && c.pdf.GetStringWidth(c.tr(string(r)+"…")) > w {
		r = r[:len(r)-1]
	}
	return string(r) + "…"
}

// wrap splits s at a space so that the first part fits w mm (in the
// current font); a first word wider than w is shortened by fit.
// fpdf's SplitText is not used: it indexes its width table by rune and
// fails on characters outside the core fonts' code page.
func (c *canvas) wrap(s string, w float64) (first, rest string) {
	if c.pdf.GetStringWidth(c.tr(s)) <= w {
		return s, ""
	}
	words := strings.Fields(s)
	n := 0
	for n < len(words) && c.pdf.GetStringWidth(c.tr(strings.Join(words[:n+1], " "))) <= w {
		n++
	}
	if n == 0 {
		return c.fit(s, w), ""
	}
	return strings.Join(words[:n], " "), strings.Join(words[n:], " ")
}

func (c *canvas) polyline(pts [][2]float64) {
	if len(pts) < 2 {
		return
	}
	c.pdf.MoveTo(pts[0][0], pts[0][1])
	for _, p := range pts[1:] {
		c.pdf.LineTo(p[0], p[1])
	}
	c.pdf.DrawPath("D")
}

// codePage wraps fpdf's UTF-8 to cp1252 translation (the code page of the
// core fonts) so that every rune becomes exactly one byte: the minus sign
// becomes a hyphen, control characters a space, and a rune the code page
// lacks a question mark, instead of stray UTF-8 bytes on the page.
func codePage(base func(string) string) func(string) string {
	return func(s string) string {
		var b strings.Builder
		for _, r := range s {
			switch {
			case r == '\u2212':
				b.WriteByte('-')
			case r < 0x20 || r == 0x7f:
				b.WriteByte(' ')
			case r < 0x80:
				b.WriteRune(r)
			default:
				// base turns a rune it lacks into ".".
				if t := base(string(r)); len(t) == 1 && t != "." {
					b.WriteString(t)
				} else {
					b.WriteByte('?')
				}
			}
		}
		return b.String()
	}
}

// Render draws s as a PDF on paper ("a4" or "letter", landscape): page 1
// the leads and the findings, page 2 (when s.Source is set) the source
// image with the traced leads over it.
func Render(w io.Writer, s *Summary, paper string) error {
	p, err := PaperByName(paper)
	if err != nil {
		return err
	}
	if err := s.Validate(); err != nil {
		return err
	}
	pdf := fpdf.New("L", "mm", p.fpdfSize, "")
	pdf.SetAutoPageBreak(false, 0)
	pdf.SetMargins(0, 0, 0)
	pdf.SetCatalogSort(true)
	pdf.SetTitle(titleOf(s), true)
	pdf.SetCreator("tracelift", true)
	pdf.SetLineCapStyle("round")
	pdf.SetLineJoinStyle("round")
	c := &canvas{pdf: pdf, tr: codePage(pdf.UnicodeTranslatorFromDescriptor("")), l: newLayout(p)}
	pages := 1
	if s.Source != nil {
		pages = 2
	}
	pdf.AddPage()
	c.header(s)
	c.leads(s)
	c.verdict(s)
	c.findings(s)
	c.caution(s.Caution, 1, pages)
	if s.Source != nil {
		pdf.AddPage()
		if err := c.sourcePage(s); err != nil {
			return err
		}
		c.caution(s.Caution, 2, pages)
	}
	if err := pdf.Error(); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	if err := pdf.Output(w); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}

func titleOf(s *Summary) string {
	if s.Title != "" {
		return s.Title
	}
	return "ECG summary"
}

// header draws the title, the technical facts and the user's fields.
func (c *canvas) header(s *Summary) {
	l := c.l
	x0, x1 := l.gridX, l.gridX+gridWMM
	c.color(colAccent)
	c.font("B", 15)
	c.text(x0, l.margin+6, titleOf(s), 'L')
	c.font("", 7)
	c.color(colMuted)
	for i, f := range s.Facts {
		if i == 3 {
			break
		}
		c.text(x1, l.margin+1.8+float64(i)*3.1, c.fit(f, 150), 'R')
	}
	// The user's fields: label above a writing line, spread across the
	// width, at most six on one line.
	fields := s.Header
	if len(fields) > 6 {
		fields = fields[:6]
	}
	if len(fields) == 0 {
		return
	}
	y := l.margin + 15.5
	cw := (x1 - x0) / float64(len(fields))
	for i, f := range fields {
		x := x0 + float64(i)*cw
		c.font("", 6.5)
		c.color(colMuted)
		c.text(x, y-4.2, strings.ToUpper(f.Label), 'L')
		c.font("", 9.5)
		c.color(colText)
		c.text(x, y-0.8, c.fit(f.Value, cw-4), 'L')
		c.draw(colMajor)
		c.pdf.SetLineWidth(0.2)
		c.pdf.Line(x, y, x+cw-4, y)
	}
}

// drawGrid draws the 1 mm and 5 mm lines over the rectangle.
func (c *canvas) drawGrid(x, y, w, h float64) {
	xs := gridLines(x, w, MinorMM)
	ys := gridLines(y, h, MinorMM)
	c.pdf.SetLineCapStyle("butt")
	c.draw(colMinor)
	c.pdf.SetLineWidth(lwMinor)
	for i, gx := range xs {
		if !isMajor(i) {
			c.pdf.Line(gx, y, gx, y+h)
		}
	}
	for i, gy := range ys {
		if !isMajor(i) {
			c.pdf.Line(x, gy, x+w, gy)
		}
	}
	c.draw(colMajor)
	c.pdf.SetLineWidth(lwMajor)
	for i, gx := range xs {
		if isMajor(i) {
			c.pdf.Line(gx, y, gx, y+h)
		}
	}
	for i, gy := range ys {
		if isMajor(i) {
			c.pdf.Line(x, gy, x+w, gy)
		}
	}
	c.pdf.SetLineCapStyle("round")
}

// leads draws the grid, the 3×4 block, the rhythm strip and the scale
// note under them.
func (c *canvas) leads(s *Summary) {
	l := c.l
	gx, gy := l.gridX, l.gridY
	c.drawGrid(gx, gy, gridWMM, gridHMM)
	rec := s.Record
	t0 := clockStart(rec)
	sx := gx + pulseMM
	c.pdf.ClipRect(gx, gy, gridWMM, gridHMM, false)
	if lone := loneLead(rec); lone != "" {
		// A single-lead strip runs across the rows, 10 s a row, instead
		// of one 2.5 s cell among eleven empty ones.
		for row := 0; row < gridRows; row++ {
			want := t0 + float64(row)*stripS
			st := chooseStretch(rec, lone, want, stripS)
			if !st.ok || (row > 0 && st.t0 < want-0.5) { // the strip has ended (chooseStretch would go back)
				break
			}
			base := gy + rowMM*float64(row) + rowMM*baseFrac
			c.pulse(gx, base)
			c.stretch(rec, st, sx, base, fmt.Sprintf("%s  %.0f–%.0f s", lone, st.t0-t0, st.t1-t0))
		}
		gridRowsDone(c)
		return
	}
	for row := 0; row < gridRows; row++ {
		base := gy + rowMM*float64(row) + rowMM*baseFrac
		c.pulse(gx, base)
		if row == gridRows-1 {
			lead := rhythmLead(rec, s.RhythmLead)
			st := chooseStretch(rec, lead, t0, stripS)
			c.stretch(rec, st, sx, base, lead+"  (rhythm)")
			continue
		}
		for col := 0; col < 4; col++ {
			x := sx + float64(col)*cellS*SpeedMMPerS
			lead := cellLeads[col][row]
			st := chooseStretch(rec, lead, t0+float64(col)*cellS, cellS)
			c.stretch(rec, st, x, base, lead)
			if col > 0 { // a short mark where one lead gives way to the next
				c.draw(colTrace)
				c.pdf.SetLineWidth(lwTrace)
				c.pdf.Line(x, base-3, x, base+3)
			}
		}
	}
	gridRowsDone(c)
}

// gridRowsDone ends the lead block: the clip, and the line of settings
// under it.
func gridRowsDone(c *canvas) {
	gx, gy := c.l.gridX, c.l.gridY
	c.pdf.ClipEnd()
	c.font("", 7)
	c.color(colMuted)
	y := gy + gridHMM + 3.4
	c.text(gx, y, fmt.Sprintf("%g mm/s   %g mm/mV   grid 1 mm / 5 mm at true size: print at 100%%, no page scaling", SpeedMMPerS, GainMMPerMV), 'L')
	c.text(gx+gridWMM, y, "each stretch drawn about its median; gaps left blank", 'R')
}

// pulse draws the 1 mV, 0.2 s calibration step at the head of a row: it
// fills the 5 mm before the traces, rising on the block's left edge.
func (c *canvas) pulse(x, base float64) {
	c.draw(colTrace)
	c.pdf.SetLineWidth(lwTrace)
	top := mvToY(base, 1)
	w := 0.2 * SpeedMMPerS
	c.polyline([][2]float64{{x, base}, {x, top}, {x + w, top}, {x + w, base}})
}

// stretch draws one lead's stretch starting at page x, with its label.
func (c *canvas) stretch(rec *record.Record, st stretch, x, base float64, label string) {
	c.font("B", 8)
	c.color(colAccent)
	c.text(x+1.2, base-rowMM*baseFrac+4, label, 'L')
	if !st.ok {
		c.font("I", 7)
		c.color(colMuted)
		c.text(x+1.2, base+1.2, "not recorded", 'L')
		return
	}
	c.draw(colTrace)
	c.pdf.SetLineWidth(lwTrace)
	for _, pl := range pathMM(rec.Lead(st.lead), st.t0, st.t1, x, base) {
		c.polyline(pl)
	}
}

// caution draws the caution box and the page number at the foot.
func (c *canvas) caution(text string, page, pages int) {
	l := c.l
	x0, w := l.gridX, gridWMM
	c.fill(colCaution)
	c.draw(colP)
	c.pdf.SetLineWidth(0.25)
	c.pdf.Rect(x0, l.cautionY, w, l.cautionH-1.5, "DF")
	c.font("B", 8.5)
	c.color(colText)
	c.text(x0+w/2, l.cautionY+4.4, c.fit(text, w-6), 'C')
	c.font("", 6.5)
	c.color(colMuted)
	c.text(x0+w, l.cautionY+l.cautionH+1.6, fmt.Sprintf("page %d of %d", page, pages), 'R')
	c.text(x0, l.cautionY+l.cautionH+1.6, "tracelift printable summary", 'L')
}

// heading draws a small section title.
func (c *canvas) heading(x, y float64, s string) {
	c.font("B", 8)
	c.color(colAccent)
	c.text(x, y, strings.ToUpper(s), 'L')
}

// findings draws the measurements, the hexaxial diagram with the axes,
// and the quality figures in three columns under the lead block.
func (c *canvas) findings(s *Summary) {
	l := c.l
	y0 := l.findingsY
	y1 := l.cautionY - 2
	x0 := l.gridX
	// Column 1: measurements.
	c.heading(x0, y0, "Measurements")
	c.font("", 6.5)
	c.color(colMuted)
	c.text(x0+74, y0, "value ± 90 % interval", 'R')
	y := y0 + 5
	const rowH = 4.1
	for _, r := range s.Measurements {
		if y > y1 {
			break
		}
		c.font("", 8.5)
		c.color(colText)
		name := c.fit(r.Name, 34)
		c.text(x0, y, name, 'L')
		if r.Note != "" {
			nx := x0 + c.pdf.GetStringWidth(c.tr(name)) + 1.5
			c.font("", 6.5)
			c.color(colMuted)
			c.text(nx, y, c.fit(r.Note, x0+36-nx), 'L')
		}
		if r.Value == "" {
			c.font("I", 8)
			c.color(colMuted)
			c.text(x0+50, y, record.Missing, 'R')
		} else {
			c.font("B", 9)
			c.color(colText)
			c.text(x0+50, y, r.Value, 'R')
			c.font("", 8.5)
			if r.Uncertainty != "" {
				c.text(x0+51, y, "± "+r.Uncertainty, 'L')
			}
			c.color(colMuted)
			c.text(x0+64, y, r.Unit, 'L')
		}
		c.draw(colMinor)
		c.pdf.SetLineWidth(0.15)
		c.pdf.Line(x0, y+1.2, x0+74, y+1.2)
		y += rowH
	}
	// Column 2: the hexaxial diagram and its legend; a single lead has
	// no frontal axis, and no empty wheel is drawn for it.
	hx := x0 + 78
	c.heading(hx, y0, "Frontal axes")
	if loneLead(s.Record) != "" {
		c.font("I", 8)
		c.color(colMuted)
		c.text(hx, y0+6, "not measurable from a single lead", 'L')
		c.quality(x0+198, y0, x0+gridWMM, y1, s)
		return
	}
	r := math.Min(18, (y1-y0-12)/2)
	cx, cy := hx+4+r+6, y0+5.5+r
	c.hexaxial(cx, cy, r, s.Axes)
	lx := cx + r + 12
	c.axisLegend(lx, y0+6, s)
	// Column 3: quality figures and flags.
	qx := x0 + 198
	c.quality(qx, y0, x0+gridWMM, y1, s)
}
