package gui

import (
	"strconv"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/widget"

	"tracelift/gui/engine"
	"tracelift/gui/model"
)

// turnNames are the choices of a page's orientation, as quarter turns
// clockwise.
var turnNames = []string{"as it is", "a quarter turn clockwise", "half a turn", "a quarter turn anticlockwise"}

// showFailure tells the user why a file could not be read, in their words,
// and offers to read it again with a scale typed by hand or turned.
func (c *Controller) showFailure(name string, ex engine.Explanation, retry func(model.Settings)) {
	if c.Failure != nil {
		c.Failure(name, ex, retry)
		return
	}
	if !ex.Retry {
		dialog.ShowInformation("Could not read "+name, ex.String(), c.win)
		return
	}
	msg := widget.NewLabel(ex.String())
	msg.Wrapping = fyne.TextWrapWord
	scale := widget.NewEntry()
	scale.SetPlaceHolder("px/mm, e.g. 11.8 for 300 dpi")
	turn := widget.NewSelect(turnNames, nil)
	turn.SetSelected(turnNames[0])
	mirror := widget.NewCheck("mirrored (scanned through the back)", nil)
	form := widget.NewForm(
		widget.NewFormItem("Scale", scale),
		widget.NewFormItem("Turn the page", turn),
		widget.NewFormItem("", mirror),
	)
	body := container.NewVBox(msg, widget.NewSeparator(), widget.NewLabel("Read "+name+" again with:"), form)
	d := dialog.NewCustomConfirm("Could not read "+name, "Read again", "Close", container.NewVScroll(body), func(ok bool) {
		if !ok {
			return
		}
		var s model.Settings
		if t := strings.TrimSpace(strings.ReplaceAll(scale.Text, ",", ".")); t != "" {
			v, err := strconv.ParseFloat(t, 64)
			if err != nil || !(v > 0) || v > 1e4 {
				c.setStatus("Scale: " + strconv.Quote(t) + " is not a positive number of px/mm.")
				return
			}
			s.PxPerMM = v
		}
		for i, n := range turnNames {
			if turn.Selected == n {
				s.QuarterTurns = i
			}
		}
		s.Mirror = mirror.Checked
		retry(s)
	}, c.win)
	d.Resize(fyne.NewSize(560, 420))
	d.Show()
}
