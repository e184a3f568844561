package gui

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"tracelift/gui/model"
	"tracelift/record"
)

// findingsView is the "Findings" tab: the measurements with their
// uncertainties, the frontal axes on the hexaxial diagram, the precordial
// transition, the flags and the caution.
type findingsView struct {
	c       *Controller
	obj     *container.Scroll
	caution *widget.Label
	values  *widget.Label
	changed *widget.Label
	axes    *widget.Label
	flags   *widget.Label
	dial    *hexaxial
	// the axes' heading and wheel, hidden for a record with fewer than
	// two frontal leads (a single-lead strip has no frontal axis)
	axesHead *widget.Label
	dialBox  *fyne.Container
	verdict  *widget.Label
}

// frontalLeadCount is how many of the six frontal leads rec holds.
func frontalLeadCount(m *model.Model) int {
	rec := m.Record()
	if rec == nil {
		return 0
	}
	n := 0
	for _, l := range frontalLeads {
		if rec.Lead(l.name) != nil {
			n++
		}
	}
	return n
}

func newFindingsView(c *Controller) *findingsView {
	f := &findingsView{c: c}
	caution := widget.NewLabel(model.Caution)
	caution.Wrapping = fyne.TextWrapWord
	caution.Importance = widget.WarningImportance
	f.caution = caution
	f.values = widget.NewLabel("Nothing measured yet.")
	f.values.TextStyle = fyne.TextStyle{Monospace: true}
	f.values.Wrapping = fyne.TextWrapWord
	f.changed = widget.NewLabel("")
	f.changed.Wrapping = fyne.TextWrapWord
	f.changed.Importance = widget.HighImportance
	f.axes = widget.NewLabel("")
	f.axes.Wrapping = fyne.TextWrapWord
	f.verdict = widget.NewLabel("")
	f.verdict.Wrapping = fyne.TextWrapWord
	f.verdict.TextStyle = fyne.TextStyle{Bold: true}
	f.verdict.Hide()
	f.flags = widget.NewLabel("")
	f.flags.Wrapping = fyne.TextWrapWord
	f.dial = newHexaxial()
	f.axesHead = heading("Frontal axes")
	f.dialBox = container.NewCenter(f.dial)
	f.obj = container.NewScroll(container.NewVBox(
		caution, f.verdict,
		heading("Measurements (value ± 90 % interval)"), f.values, f.changed,
		f.axesHead, f.dialBox, f.axes,
		heading("Flags"), f.flags,
	))
	return f
}

func (f *findingsView) refresh() {
	m := f.c.m
	var ch []string
	for _, c := range m.Changes() {
		ch = append(ch, fmt.Sprintf("%s %s → %s", c.Label, c.Before, c.After))
	}
	if len(ch) > 0 {
		f.changed.SetText("Changed by the last edit: " + strings.Join(ch, "; "))
		f.changed.Show()
	} else {
		f.changed.Hide()
	}
	s := m.Summary()
	f.showVerdict(s)
	if s == nil {
		msg := "Not measured."
		if err := m.MeasureErr(); err != nil {
			msg += " " + err.Error()
		}
		f.values.SetText(msg)
		f.axes.SetText("")
		f.flags.SetText("")
		f.dial.set(nil)
		return
	}
	var b strings.Builder
	for _, v := range s.Values {
		fmt.Fprintf(&b, "%-16s %s\n", v.Label, v.Format())
	}
	f.values.SetText(strings.TrimRight(b.String(), "\n"))
	ax := fmt.Sprintf("QRS axis: %s (%s)\nP axis: %s   T axis: %s\nTransition: %s   Rhythm: %s",
		deg(s.QRSAxisDeg), orNone(s.AxisClass), deg(s.PAxisDeg), deg(s.TAxisDeg), orNone(s.Transition), orNone(s.Rhythm))
	if len(s.AxisMethods) > 0 {
		ax += "\nBy method: " + strings.Join(s.AxisMethods, "; ")
	}
	f.axes.SetText(ax)
	if frontalLeadCount(m) < 2 {
		// A single-lead strip: no frontal axis to draw; the space goes to
		// the measurements.
		f.axesHead.Hide()
		f.dialBox.Hide()
		f.axes.SetText(fmt.Sprintf("Transition: %s   Rhythm: %s", orNone(s.Transition), orNone(s.Rhythm)))
	} else {
		f.axesHead.Show()
		f.dialBox.Show()
	}
	if len(s.Flags) == 0 {
		f.flags.SetText("None raised.")
	} else {
		f.flags.SetText("• " + strings.Join(s.Flags, "\n• "))
	}
	f.dial.set(s)
}

// showVerdict puts the page's verdict above the findings: the level,
// the reasons and what to do.
func (f *findingsView) showVerdict(s *model.Summary) {
	if s == nil || s.Verdict == "" {
		f.verdict.Hide()
		return
	}
	txt := "This page is " + s.Verdict + "."
	for _, r := range s.VerdictReasons {
		txt += "\n• " + r
	}
	f.verdict.SetText(txt)
	switch s.VerdictLevel {
	case "not_readable":
		f.verdict.Importance = widget.DangerImportance
	case "care":
		f.verdict.Importance = widget.WarningImportance
	default:
		f.verdict.Importance = widget.SuccessImportance
	}
	f.verdict.Show()
	f.verdict.Refresh()
}

func deg(v float64) string { return record.FormatNum("%.0f°", v) }

func orNone(s string) string {
	if s == "" {
		return record.Missing
	}
	return s
}

// hexaxial draws the six frontal leads' axes (I 0°, II 60°, III 120°,
// aVF 90°, aVL −30°, aVR −150°; angles grow clockwise toward the feet, the
// usual convention: common practice) with the QRS, P and T axes as arrows.
type hexaxial struct {
	widget.BaseWidget
	s *model.Summary
}

func newHexaxial() *hexaxial {
	h := &hexaxial{}
	h.ExtendBaseWidget(h)
	return h
}

func (h *hexaxial) set(s *model.Summary) { h.s = s; h.Refresh() }

var frontalLeads = []struct {
	name string
	deg  float64
}{{"I", 0}, {"II", 60}, {"III", 120}, {"aVF", 90}, {"aVL", -30}, {"aVR", -150}}

func (h *hexaxial) CreateRenderer() fyne.WidgetRenderer {
	r := &hexRenderer{h: h}
	r.raster = canvas.NewRaster(r.draw)
	for _, l := range frontalLeads {
		t := canvas.NewText(l.name, theme.Color(theme.ColorNameForeground))
		t.TextSize = theme.CaptionTextSize()
		r.texts = append(r.texts, t)
	}
	for _, n := range []string{"QRS", "P", "T", "grey arc: normal QRS −30° to +90°"} {
		col, ok := axisColors[n]
		if !ok {
			col = color.NRGBA{0x80, 0x80, 0x90, 0xff}
		}
		t := canvas.NewText(n, col)
		t.TextStyle = fyne.TextStyle{Bold: true}
		t.TextSize = theme.CaptionTextSize()
		r.keys = append(r.keys, t)
	}
	return r
}

var axisColors = map[string]color.NRGBA{
	"QRS": {0xd0, 0x20, 0x20, 0xff},
	"P":   {0x20, 0x70, 0xd0, 0xff},
	"T":   {0x10, 0x9a, 0x3a, 0xff},
}

type hexRenderer struct {
	h      *hexaxial
	raster *canvas.Raster
	texts  []*canvas.Text
	keys   []*canvas.Text
}

const dialSize = 240

func (r *hexRenderer) Destroy()           {}
func (r *hexRenderer) MinSize() fyne.Size { return fyne.NewSize(dialSize, dialSize+18) }
func (r *hexRenderer) Refresh()           { r.raster.Refresh(); r.Layout(r.h.Size()) }
func (r *hexRenderer) Objects() []fyne.CanvasObject {
	o := []fyne.CanvasObject{r.raster}
	for _, t := range r.texts {
		o = append(o, t)
	}
	for _, t := range r.keys {
		o = append(o, t)
	}
	return o
}

func (r *hexRenderer) Layout(sz fyne.Size) {
	r.raster.Resize(fyne.NewSize(dialSize, dialSize))
	c := float64(dialSize) / 2
	R := c - 16
	for i, l := range frontalLeads {
		t := r.texts[i]
		t.Color = theme.Color(theme.ColorNameForeground)
		ms := t.MinSize()
		a := l.deg * math.Pi / 180
		x := c + (R+9)*math.Cos(a) - float64(ms.Width)/2
		y := c + (R+9)*math.Sin(a) - float64(ms.Height)/2
		t.Move(fyne.NewPos(float32(x), float32(y)))
	}
	x := float32(4)
	for _, t := range r.keys {
		t.Move(fyne.NewPos(x, dialSize))
		x += t.MinSize().Width + 14
	}
}

func (r *hexRenderer) draw(w, h int) image.Image {
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	k := float64(w) / dialSize
	c := float64(w) / 2
	R := (dialSize/2 - 16) * k
	fg := theme.Color(theme.ColorNameForeground)
	cr, cg, cb, _ := fg.RGBA()
	grey := color.NRGBA{uint8(cr >> 8), uint8(cg >> 8), uint8(cb >> 8), 0x60}
	for s := 0; s < 360; s++ {
		a0, a1 := float64(s)*math.Pi/180, float64(s+1)*math.Pi/180
		line(img, c+R*math.Cos(a0), c+R*math.Sin(a0), c+R*math.Cos(a1), c+R*math.Sin(a1), k, grey)
	}
	for _, l := range frontalLeads {
		a := l.deg * math.Pi / 180
		line(img, c-R*math.Cos(a), c-R*math.Sin(a), c+R*math.Cos(a), c+R*math.Sin(a), k, grey)
	}
	// the normal QRS range −30°…+90° (AHA/ACCF/HRS 2009, as in the
	// measurement engine), as a faint arc just inside the circle
	for s := -30; s < 90; s++ {
		a0, a1 := float64(s)*math.Pi/180, float64(s+1)*math.Pi/180
		rr := R - 4*k
		line(img, c+rr*math.Cos(a0), c+rr*math.Sin(a0), c+rr*math.Cos(a1), c+rr*math.Sin(a1), 4*k, color.NRGBA{0x80, 0x80, 0x90, 0x70})
	}
	if s := r.h.s; s != nil {
		for _, ax := range []struct {
			n string
			v float64
			f float64
		}{{"T", s.TAxisDeg, 0.7}, {"P", s.PAxisDeg, 0.55}, {"QRS", s.QRSAxisDeg, 0.95}} {
			if math.IsNaN(ax.v) {
				continue
			}
			a := ax.v * math.Pi / 180
			ex, ey := c+ax.f*R*math.Cos(a), c+ax.f*R*math.Sin(a)
			col := axisColors[ax.n]
			line(img, c, c, ex, ey, 3*k, col)
			for _, d := range []float64{2.6, -2.6} { // arrow head
				line(img, ex, ey, ex-10*k*math.Cos(a+d/6), ey-10*k*math.Sin(a+d/6), 3*k, col)
			}
		}
	}
	return img
}
