package report

import (
	"fmt"
	"math"

	"github.com/go-pdf/fpdf"

	"tracelift/record"
)

// HexaxialLeads are the six frontal leads at the angle of their positive
// pole, in degrees, 0° towards the patient's left and positive clockwise
// on the page (common practice: I 0°, II +60°, III +120°, aVR −150°,
// aVL −30°, aVF +90°).
var HexaxialLeads = []struct {
	Lead string
	Deg  float64
}{
	{"I", 0}, {"II", 60}, {"III", 120}, {"aVR", -150}, {"aVL", -30}, {"aVF", 90},
}

// Normal frontal QRS sector, degrees (common practice: −30° to +90°).
const (
	normalFromDeg = -30.0
	normalToDeg   = 90.0
)

// polar returns the page point at angle deg and radius r about (cx, cy).
// The page's y grows downwards, so a positive angle turns clockwise as
// the hexaxial convention wants.
func polar(cx, cy, r, deg float64) (x, y float64) {
	a := deg * math.Pi / 180
	return cx + r*math.Cos(a), cy + r*math.Sin(a)
}

// signedDeg prints an angle with its sign: "+60°", "−30°", "0°".
func signedDeg(d float64) string {
	d = math.Round(d)
	switch {
	case d > 0:
		return fmt.Sprintf("+%.0f°", d)
	case d < 0:
		return fmt.Sprintf("-%.0f°", -d)
	}
	return "0°"
}

func axisColor(name string, i int) rgb {
	switch name {
	case "QRS":
		return colQRS
	case "P":
		return colP
	case "T":
		return colT
	}
	return []rgb{colQRS, colP, colT}[i%3]
}

// hexaxial draws the circle, the normal sector, the six lead lines with
// their labels and one arrow per measured axis.
func (c *canvas) hexaxial(cx, cy, r float64, axes []Axis) {
	pdf := c.pdf
	// Normal sector, shaded lightly.
	pts := []fpdf.PointType{{X: cx, Y: cy}}
	for d := normalFromDeg; d <= normalToDeg+1e-9; d += 2 {
		x, y := polar(cx, cy, r, d)
		pts = append(pts, fpdf.PointType{X: x, Y: y})
	}
	c.fill(colSector)
	pdf.Polygon(pts, "F")
	// Circle and 30° ticks.
	c.draw(colMajor)
	pdf.SetLineWidth(0.3)
	pdf.Circle(cx, cy, r, "D")
	pdf.SetLineWidth(0.2)
	for d := 0.0; d < 360; d += 30 {
		x0, y0 := polar(cx, cy, r-1, d)
		x1, y1 := polar(cx, cy, r, d)
		pdf.Line(x0, y0, x1, y1)
	}
	// Lead lines through the centre; the positive pole solid to the rim.
	for _, hl := range HexaxialLeads {
		xa, ya := polar(cx, cy, r, hl.Deg)
		xb, yb := polar(cx, cy, r, hl.Deg+180)
		c.draw(colMinor)
		pdf.SetLineWidth(0.2)
		pdf.Line(xb, yb, cx, cy)
		c.draw(colMajor)
		pdf.SetLineWidth(0.25)
		pdf.Line(cx, cy, xa, ya)
		// Label outside the rim, aligned away from the circle.
		lx, ly := polar(cx, cy, r+2.6, hl.Deg)
		cos, sin := math.Cos(hl.Deg*math.Pi/180), math.Sin(hl.Deg*math.Pi/180)
		align := byte('C')
		switch {
		case cos > 0.3:
			align = 'L'
		case cos < -0.3:
			align = 'R'
		}
		ly += 1.1 + 1.4*sin
		c.font("B", 7)
		c.color(colAccent)
		c.text(lx, ly, hl.Lead+" "+signedDeg(hl.Deg), align)
	}
	// Arrows, QRS last so it lies on top.
	order := make([]int, 0, len(axes))
	for i, a := range axes {
		if a.Name != "QRS" {
			order = append(order, i)
		}
	}
	for i, a := range axes {
		if a.Name == "QRS" {
			order = append(order, i)
		}
	}
	for _, i := range order {
		a := axes[i]
		if math.IsNaN(a.Deg) {
			continue
		}
		k := axisColor(a.Name, i)
		length, width := r*0.9, 0.45
		if a.Name == "QRS" {
			width = 0.7
		} else {
			length = r * 0.78
		}
		c.arrow(cx, cy, length, a.Deg, width, k)
	}
	c.fill(colTrace)
	pdf.Circle(cx, cy, 0.6, "F")
}

// arrow draws a line from the centre at angle deg with a filled head.
func (c *canvas) arrow(cx, cy, length, deg, width float64, k rgb) {
	const head = 2.6
	x1, y1 := polar(cx, cy, length, deg)
	xs, ys := polar(cx, cy, length-head*0.9, deg)
	c.draw(k)
	c.fill(k)
	c.pdf.SetLineWidth(width)
	c.pdf.Line(cx, cy, xs, ys)
	a := deg * math.Pi / 180
	nx, ny := -math.Sin(a), math.Cos(a) // normal to the shaft
	bx, by := polar(cx, cy, length-head, deg)
	c.pdf.Polygon([]fpdf.PointType{
		{X: x1, Y: y1},
		{X: bx + nx*head*0.42, Y: by + ny*head*0.42},
		{X: bx - nx*head*0.42, Y: by - ny*head*0.42},
	}, "F")
}

// axisLegend lists the axes with their colours, then the category and
// the transition.
func (c *canvas) axisLegend(x, y float64, s *Summary) {
	for i, a := range s.Axes {
		k := axisColor(a.Name, i)
		c.draw(k)
		c.pdf.SetLineWidth(0.7)
		c.pdf.Line(x, y-1.1, x+5, y-1.1)
		c.font("B", 8.5)
		c.color(colText)
		c.text(x+7, y, a.Name, 'L')
		if math.IsNaN(a.Deg) {
			c.font("I", 8)
			c.color(colMuted)
			c.text(x+16, y, record.Missing, 'L')
		} else {
			c.font("B", 9)
			c.text(x+16, y, signedDeg(a.Deg), 'L')
			if a.PlusMinusDeg > 0 {
				c.font("", 8.5)
				c.text(x+27, y, fmt.Sprintf("± %.0f°", a.PlusMinusDeg), 'L')
			}
		}
		y += 4.6
	}
	y += 1.5
	c.font("", 6.5)
	c.color(colMuted)
	c.text(x, y, "QRS AXIS", 'L')
	c.font("", 8.5)
	c.color(colText)
	c.text(x, y+3.6, c.fit(orDash(s.Category), 56), 'L')
	y += 8.6
	c.font("", 6.5)
	c.color(colMuted)
	c.text(x, y, "PRECORDIAL TRANSITION", 'L')
	c.font("", 8.5)
	c.color(colText)
	c.text(x, y+3.6, c.fit(orDash(s.Transition), 56), 'L')
	y += 8.6
	c.fill(colSector)
	c.pdf.Rect(x, y-2.4, 4, 2.8, "F")
	c.font("", 6.5)
	c.color(colMuted)
	c.text(x+5.5, y, "normal QRS sector -30° to +90°", 'L')
}

func orDash(s string) string {
	if s == "" {
		return "not determined"
	}
	return s
}
