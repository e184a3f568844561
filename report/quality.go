package report

import (
	"fmt"
	"math"
)

// quality draws the per-lead quality figures as small bars, then the
// notes and the flags, inside [x, x1] × [y0, y1].
func (c *canvas) quality(x, y0, x1, y1 float64, s *Summary) {
	y := y0 - 2 // the lists start at the top when there is no quality table
	if len(s.Quality) > 0 {
		c.heading(x, y0, "Tracing quality")
		y = y0 + 4.6
	}
	colW := (x1 - x) / 2
	const rowH = 3.5
	rows := (len(s.Quality) + 1) / 2
	for i, q := range s.Quality {
		cx := x + float64(i/rows)*colW
		cy := y + float64(i%rows)*rowH
		c.font("B", 7)
		c.color(colText)
		c.text(cx, cy, q.Lead, 'L')
		bx, bw := cx+6, colW-17
		c.fill(colMinor)
		c.pdf.Rect(bx, cy-2.1, bw, 2.2, "F")
		if !math.IsNaN(q.Confidence) {
			v := math.Max(0, math.Min(1, q.Confidence))
			k := colAccent
			if v < 0.5 {
				k = colP
			}
			c.fill(k)
			c.pdf.Rect(bx, cy-2.1, bw*v, 2.2, "F")
			c.font("", 7)
			c.color(colText)
			c.text(cx+colW-4, cy, fmt.Sprintf("%.0f%%", 100*v), 'R')
		} else {
			c.font("I", 6.5)
			c.color(colMuted)
			c.text(cx+colW-4, cy, "n/a", 'R')
		}
	}
	if rows > 0 {
		y += float64(rows)*rowH + 1.5
	}
	list := func(title string, items []string) {
		if len(items) == 0 || y+5.6 > y1 { // no room for the heading and one line
			return
		}
		c.heading(x, y+2, title)
		y += 5.6
		for i, it := range items {
			if y > y1 {
				break
			}
			if y+3.2 > y1 && i < len(items)-1 {
				c.font("I", 7)
				c.color(colMuted)
				c.text(x, y, fmt.Sprintf("… and %d more", len(items)-i), 'L')
				y += 3.2
				break
			}
			c.font("", 7)
			c.color(colText)
			// Up to two lines per item; the second shortened to fit.
			first, rest := c.wrap(it, x1-x-3)
			c.text(x, y, "- "+first, 'L')
			y += 3.2
			if rest != "" && y <= y1 {
				c.text(x+2, y, c.fit(rest, x1-x-5), 'L')
				y += 3.2
			}
		}
	}
	list("Flags", s.Flags)
	list("Checks", s.QualityNotes)
}
