package gui

import (
	"fmt"
	"image/color"
	"strconv"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/widget"

	"tracelift/gui/model"
	"tracelift/record"
)

// sidePanel is the "Reading" tab: what was found (scale, gain, speed,
// layout) with fields to override it, the chosen panel's lead, and what the
// last edit changed.
type sidePanel struct {
	c   *Controller
	obj *container.Scroll

	found   *widget.Label
	pxPerMM *widget.Entry
	gain    *widget.Entry
	speed   *widget.Entry
	layout  *widget.Select
	page    *widget.Select
	panel   *widget.Label
	lead    *widget.Select
	changes *widget.Label
	edits   *widget.Label
	filling bool
}

const layoutAuto = "Found automatically"

func newSidePanel(c *Controller) *sidePanel {
	p := &sidePanel{c: c}
	p.found = widget.NewLabel("Nothing open yet.")
	p.found.Wrapping = fyne.TextWrapWord
	p.pxPerMM = widget.NewEntry()
	p.gain = widget.NewEntry()
	p.speed = widget.NewEntry()
	p.layout = widget.NewSelect([]string{layoutAuto}, nil)
	p.layout.SetSelected(layoutAuto)
	p.page = widget.NewSelect([]string{"1"}, nil)
	p.page.SetSelected("1")
	apply := widget.NewButton("Read again with these", p.applySettings)
	apply.Importance = widget.HighImportance
	reset := widget.NewButton("Back to found values", func() { c.Reread(model.Settings{}) })
	// Orientation: each press reads the page again turned or mirrored
	// (the corrections, in lead time and mV, stay).
	turnBy := func(q int) func() {
		return func() {
			if !c.m.Loaded() {
				return
			}
			s := c.m.Settings()
			s.QuarterTurns = ((s.QuarterTurns+q)%4 + 4) % 4
			c.Reread(s)
		}
	}
	turnL := widget.NewButton("↺ Turn left", turnBy(3))
	turnR := widget.NewButton("↻ Turn right", turnBy(1))
	mirror := widget.NewButton("⇆ Mirror", func() {
		if !c.m.Loaded() {
			return
		}
		s := c.m.Settings()
		s.Mirror = !s.Mirror
		c.Reread(s)
	})
	form := widget.NewForm(
		widget.NewFormItem("Scale (px/mm)", p.pxPerMM),
		widget.NewFormItem("Gain (mm/mV)", p.gain),
		widget.NewFormItem("Speed (mm/s)", p.speed),
		widget.NewFormItem("Layout", p.layout),
		widget.NewFormItem("Page", p.page),
	)
	p.panel = widget.NewLabel("Click a panel on the printout to choose it.")
	p.panel.Wrapping = fyne.TextWrapWord
	leads := append(append([]string(nil), record.Standard12...), "Rhythm")
	p.lead = widget.NewSelect(leads, func(s string) {
		if p.filling || c.view.selected < 0 {
			return
		}
		c.edited(c.m.Assign(c.view.selected, s))
	})
	p.lead.PlaceHolder = "reassign to…"
	p.changes = widget.NewLabel(record.Missing)
	p.changes.Wrapping = fyne.TextWrapWord
	p.edits = widget.NewLabel("")
	p.edits.Wrapping = fyne.TextWrapWord

	legend := container.NewHBox(swatch(confidenceColor(0.9), "sure"), swatch(confidenceColor(0.6), "doubtful"),
		swatch(confidenceColor(0.2), "poor"))
	p.obj = container.NewScroll(container.NewVBox(
		heading("What was found"), p.found,
		heading("Calibration and layout"), form, container.NewGridWithColumns(2, apply, reset),
		heading("Page orientation"), container.NewGridWithColumns(3, turnL, turnR, mirror),
		widget.NewLabel("Or pick the Scale tool and click two grid lines."),
		widget.NewSeparator(),
		heading("Chosen panel"), p.panel, p.lead,
		widget.NewSeparator(),
		heading("Trace colour = tracing confidence"), legend,
		widget.NewSeparator(),
		heading("What changed"), p.changes,
		heading("Corrections"), p.edits,
	))
	return p
}

func heading(s string) *widget.Label {
	return widget.NewLabelWithStyle(s, fyne.TextAlignLeading, fyne.TextStyle{Bold: true})
}

func swatch(c color.NRGBA, label string) fyne.CanvasObject {
	r := canvas.NewRectangle(c)
	r.SetMinSize(fyne.NewSize(22, 6))
	return container.NewHBox(container.NewCenter(r), widget.NewLabel(label))
}

func (p *sidePanel) applySettings() {
	cur := p.c.m.Settings()
	s := model.Settings{QuarterTurns: cur.QuarterTurns, Mirror: cur.Mirror}
	parse := func(e *widget.Entry, dst *float64, what string) bool {
		t := strings.TrimSpace(e.Text)
		if t == "" {
			return true
		}
		v, err := strconv.ParseFloat(t, 64)
		if err != nil || !(v > 0) || v > 1e4 {
			p.c.setStatus(fmt.Sprintf("%s: %q is not a positive number.", what, t))
			return false
		}
		*dst = v
		return true
	}
	if !parse(p.pxPerMM, &s.PxPerMM, "Scale") || !parse(p.gain, &s.GainMMPerMV, "Gain") || !parse(p.speed, &s.SpeedMMPerS, "Speed") {
		return
	}
	if p.layout.Selected != layoutAuto {
		s.Layout = p.layout.Selected
	}
	if n, err := strconv.Atoi(p.page.Selected); err == nil && n > 1 {
		s.Page = n - 1
	}
	p.c.Reread(s)
}

func (p *sidePanel) refresh() {
	m := p.c.m
	a := m.Analysis()
	if a == nil {
		return
	}
	p.filling = true
	defer func() { p.filling = false }()
	p.found.SetText(fmt.Sprintf("%s\nScale %.2f px/mm (from the %s, confidence %.0f%%)\nGain %.3g mm/mV, speed %.3g mm/s\nLayout %s, %d panels",
		a.Name, a.ImagePxPerMM, a.ScaleSource, 100*a.ScaleConf, a.GainMMPerMV, a.SpeedMMPerS, a.Layout, len(a.Panels)))
	for _, w := range a.Warnings {
		p.found.SetText(p.found.Text + "\n⚠ " + w)
	}
	s := m.Settings()
	setNum := func(e *widget.Entry, v, found float64) {
		e.SetPlaceHolder(fmt.Sprintf("%.4g (found)", found))
		if v > 0 {
			e.SetText(strconv.FormatFloat(v, 'g', 6, 64))
		} else {
			e.SetText("")
		}
	}
	setNum(p.pxPerMM, s.PxPerMM, a.ImagePxPerMM)
	setNum(p.gain, s.GainMMPerMV, a.GainMMPerMV)
	setNum(p.speed, s.SpeedMMPerS, a.SpeedMMPerS)
	p.layout.Options = append([]string{layoutAuto}, a.Layouts...)
	if s.Layout != "" {
		p.layout.SetSelected(s.Layout)
	} else {
		p.layout.SetSelected(layoutAuto)
	}

	var pages []string
	for k := 1; k <= max(a.PageCount, 1); k++ {
		pages = append(pages, strconv.Itoa(k))
	}
	p.page.Options = pages
	p.page.SetSelected(strconv.Itoa(s.Page + 1))
	if len(pages) > 1 {
		p.page.Enable()
	} else {
		p.page.Disable()
	}

	if i := p.c.view.selected; i >= 0 && i < len(m.Panels()) {
		pv := m.Panels()[i]
		conf := "unknown"
		if pv.Confidence == pv.Confidence {
			conf = fmt.Sprintf("%.0f%%", 100*pv.Confidence)
		}
		p.panel.SetText(fmt.Sprintf("Lead %s (printed %s), %.2f–%.2f s, tracing confidence %s. Reassign it:", pv.Lead, pv.Printed, pv.T0S, pv.T1S, conf))
		p.lead.SetSelected(pv.Lead)
		p.lead.Enable()
	} else {
		p.panel.SetText("Click a panel on the printout (Look tool) to choose it.")
		p.lead.ClearSelected()
		p.lead.Disable()
	}
	var b strings.Builder
	for _, ch := range m.Changes() {
		fmt.Fprintf(&b, "%s: %s → %s\n", ch.Label, ch.Before, ch.After)
	}
	if b.Len() == 0 {
		b.WriteString("Nothing yet. Edits show here with the measurements they changed.")
	}
	p.changes.SetText(strings.TrimSpace(b.String()))
	corrs := m.Corrections()
	var e strings.Builder
	fmt.Fprintf(&e, "%d applied", len(corrs))
	if pp := m.ProjectPath(); pp != "" {
		fmt.Fprintf(&e, ", kept in %s", pp)
	} else {
		e.WriteString(" (demo: not saved)")
	}
	if err := m.SaveErr(); err != nil {
		fmt.Fprintf(&e, "\nNOT SAVED: %v", err)
	}
	if err := m.ApplyErr(); err != nil {
		fmt.Fprintf(&e, "\n%v", err)
	}
	for k := len(corrs) - 1; k >= 0 && k >= len(corrs)-8; k-- {
		fmt.Fprintf(&e, "\n%d. %s", k+1, describe(corrs[k]))
	}
	p.edits.SetText(e.String())
}

func describe(c record.Correction) string {
	switch c.Kind {
	case record.CorrShift:
		return fmt.Sprintf("%s %.2f–%.2f s moved %+.2f mV", c.Lead, c.StartS, c.EndS, c.OffsetMV)
	case record.CorrRedraw:
		return fmt.Sprintf("%s redrawn %.2f–%.2f s", c.Lead, c.Points[0].TS, c.Points[len(c.Points)-1].TS)
	case record.CorrErase:
		return fmt.Sprintf("%s %.2f–%.2f s erased", c.Lead, c.StartS, c.EndS)
	case record.CorrBaseline:
		return fmt.Sprintf("%s zero line moved %+.2f mV", c.Lead, c.OffsetMV)
	case record.CorrAssign:
		return fmt.Sprintf("%s is really %s", c.Lead, c.NewLead)
	case record.CorrBox:
		return fmt.Sprintf("%s box moved or resized", c.Lead)
	case record.CorrDrawnPanel:
		return fmt.Sprintf("%s panel drawn by hand", c.Lead)
	}
	return c.Kind
}
