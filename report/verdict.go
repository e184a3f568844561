package report

import "strings"

// Verdict band colours: a pale fill per level, the text always dark.
var (
	colReady       = rgb{226, 240, 234}
	colCare        = rgb{252, 236, 200}
	colNotReadable = rgb{246, 208, 200}
)

// verdictBandMM is the room the verdict band takes above the findings.
const verdictBandMM = 6

// verdict draws the page's verdict as a band between the lead block and
// the findings, so that it is read before any number: the level in words,
// then the reasons and what to do, shortened to one line (the Checks
// list repeats them in full). The findings move down to make room.
func (c *canvas) verdict(s *Summary) {
	if s.Verdict == "" {
		return
	}
	c.l.findingsY += verdictBandMM
	l := c.l
	x0, w := l.gridX, gridWMM
	y := l.gridY + gridHMM + 5 // under the lead block's scale note
	k := colReady
	switch s.VerdictLevel {
	case "care":
		k = colCare
	case "not_readable":
		k = colNotReadable
	}
	c.fill(k)
	c.pdf.Rect(x0, y, w, 4.6, "F")
	c.font("B", 8)
	c.color(colText)
	head := strings.ToUpper(s.Verdict[:1]) + s.Verdict[1:]
	c.text(x0+2, y+3.3, head, 'L')
	if len(s.VerdictReasons) > 0 {
		hx := x0 + 4 + c.pdf.GetStringWidth(c.tr(head))
		c.font("", 7)
		c.text(hx, y+3.3, c.fit(strings.Join(s.VerdictReasons, "; "), x0+w-2-hx), 'L')
	}
}
