package gui

import (
	"image"
	"image/draw"
	"math"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"
)

// Tool is what a drag on the printout does.
type Tool int

// The tools.
const (
	ToolLook     Tool = iota // drag pans, a click selects a panel
	ToolShift                // drag across a stretch, then drag it up or down
	ToolRedraw               // draw the trace freehand
	ToolErase                // drag across a stretch to make it a gap
	ToolBaseline             // drag a panel's zero line up or down
	ToolBox                  // drag a panel's box to a new place
	ToolScale                // click two grid lines a known distance apart
	ToolPanel                // draw a box around a lead the reader missed
)

var toolNames = []string{"Look", "Shift", "Redraw", "Erase", "Baseline", "Box", "Scale", "New panel"}

// printView shows the printout with its overlays and turns pointer input
// into edits. Its state is the view transform and the gesture under way;
// everything drawn comes from the model.
type printView struct {
	widget.BaseWidget
	ctl *Controller

	src  *image.NRGBA // the printout, converted once
	zoom float64      // screen units per image px
	offX float64      // image px at the view's left edge
	offY float64
	fit  bool // show the whole page, refitting on every resize, until the user zooms or pans

	tool     Tool
	selected int // panel chosen with a click (-1 none)

	// gesture under way
	dragging     bool
	pressAt      [2]float64 // image px
	lastAt       [2]float64
	stroke       [][2]float64
	selPanel     int
	selX0        float64 // selection stretch in image px
	selX1        float64
	moving       bool    // a drag inside the selection moves it
	moveDY       float64 // vertical offset under way (image px)
	moveDX       float64
	scaleClick   [][2]float64
	cancelled    bool    // Escape during a drag: ignore the rest of it
	hideOverlays bool    // the switch on the tool bar: show the page alone
	grip         [4]bool // Box tool: which edges (x0, y0, x1, y1) the drag moves; none = the whole box
}

// gripPx is how near an edge (screen units) a Box drag must start to move
// that edge alone.
const gripPx = 8

// gripAt says which edges of box a drag starting at p takes: those within
// tol image px of p. None means the drag moves the whole box.
func gripAt(box [4]float64, p [2]float64, tol float64) [4]bool {
	// On a small box the grips would cover it all: keep its middle third
	// for moving it.
	tx := math.Min(tol, (box[2]-box[0])/3)
	ty := math.Min(tol, (box[3]-box[1])/3)
	return [4]bool{
		math.Abs(p[0]-box[0]) <= tx, math.Abs(p[1]-box[1]) <= ty,
		math.Abs(p[0]-box[2]) <= tx, math.Abs(p[1]-box[3]) <= ty,
	}
}

// gripped returns the panel whose edge or corner handle lies under p (within
// gripPx screen units, inside or outside its box) and the edges it takes;
// -1 when none does. The selected panel is tried first, then the others.
func (v *printView) gripped(p [2]float64) (int, [4]bool) {
	views := v.ctl.m.Panels()
	tol := gripPx / v.zoom
	order := make([]int, 0, len(views)+1)
	if v.selected >= 0 && v.selected < len(views) {
		order = append(order, v.selected)
	}
	for i := range views {
		order = append(order, i)
	}
	for _, i := range order {
		b := views[i].Box
		if p[0] < b[0]-tol || p[0] > b[2]+tol || p[1] < b[1]-tol || p[1] > b[3]+tol {
			continue
		}
		if g := gripAt(b, p, tol); g != [4]bool{} {
			return i, g
		}
	}
	return -1, [4]bool{}
}

// drawnBox is the box the New panel drag under way spans, corners in any
// order.
func (v *printView) drawnBox() [4]float64 {
	a, b := v.pressAt, [2]float64{v.pressAt[0] + v.moveDX, v.pressAt[1] + v.moveDY}
	return [4]float64{math.Min(a[0], b[0]), math.Min(a[1], b[1]), math.Max(a[0], b[0]), math.Max(a[1], b[1])}
}

// boxAfterDrag is panel p's box moved or resized by the drag under way.
func (v *printView) boxAfterDrag(p int) [4]float64 {
	b := v.ctl.m.Panels()[p].Box
	return dragBox(b, v.grip, v.moveDX, v.moveDY)
}

// dragBox moves the gripped edges of b by (dx, dy), or the whole box when
// no edge is gripped; a box never turns inside out (at least 2 px).
func dragBox(b [4]float64, grip [4]bool, dx, dy float64) [4]float64 {
	if grip == [4]bool{} {
		return [4]float64{b[0] + dx, b[1] + dy, b[2] + dx, b[3] + dy}
	}
	if grip[0] {
		b[0] = math.Min(b[0]+dx, b[2]-2)
	}
	if grip[2] {
		b[2] = math.Max(b[2]+dx, b[0]+2)
	}
	if grip[1] {
		b[1] = math.Min(b[1]+dy, b[3]-2)
	}
	if grip[3] {
		b[3] = math.Max(b[3]+dy, b[1]+2)
	}
	return b
}

func newPrintView(c *Controller) *printView {
	v := &printView{ctl: c, zoom: 1, fit: true, selected: -1, selPanel: -1}
	v.ExtendBaseWidget(v)
	return v
}

// setImage installs a new printout and fits it into the view.
func (v *printView) setImage(img image.Image) {
	if img == nil {
		v.src = nil
	} else if n, ok := img.(*image.NRGBA); ok {
		v.src = n
	} else {
		b := img.Bounds()
		n := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
		draw.Draw(n, n.Bounds(), img, b.Min, draw.Src)
		v.src = n
	}
	v.fit = true
	v.clearGesture()
	v.Refresh()
}

func (v *printView) clearGesture() {
	v.dragging, v.moving, v.stroke = false, false, nil
	v.selPanel, v.moveDY, v.moveDX = -1, 0, 0
	v.scaleClick = nil
}

func (v *printView) setTool(t Tool) {
	v.tool = t
	v.clearGesture()
	v.Refresh()
}

// fitNow chooses the zoom that shows the whole page.
func (v *printView) fitNow() {
	sz := v.Size()
	if v.src == nil || sz.Width < 10 || sz.Height < 10 {
		return
	}
	w, h := float64(v.src.Rect.Dx()), float64(v.src.Rect.Dy())
	v.zoom = math.Min(float64(sz.Width)/w, float64(sz.Height)/h)
	v.offX = -(float64(sz.Width)/v.zoom - w) / 2
	v.offY = -(float64(sz.Height)/v.zoom - h) / 2
}

func (v *printView) toImage(p fyne.Position) [2]float64 {
	return [2]float64{v.offX + float64(p.X)/v.zoom, v.offY + float64(p.Y)/v.zoom}
}

// zoomBy multiplies the zoom keeping the image point under p in place.
func (v *printView) zoomBy(f float64, p fyne.Position) {
	v.fit = false
	at := v.toImage(p)
	v.zoom = math.Min(math.Max(v.zoom*f, 0.02), 20)
	v.offX = at[0] - float64(p.X)/v.zoom
	v.offY = at[1] - float64(p.Y)/v.zoom
	v.Refresh()
}

func (v *printView) zoomCentre(f float64) {
	sz := v.Size()
	v.zoomBy(f, fyne.NewPos(sz.Width/2, sz.Height/2))
}

func (v *printView) pan(dxUnits, dyUnits float64) {
	v.fit = false
	v.offX -= dxUnits / v.zoom
	v.offY -= dyUnits / v.zoom
	v.Refresh()
}

// Scrolled zooms with the wheel.
func (v *printView) Scrolled(e *fyne.ScrollEvent) {
	f := math.Pow(1.0015, float64(e.Scrolled.DY))
	v.zoomBy(f, e.Position)
}

// Tapped handles a click that did not drag (the driver sends it once per
// click; a second handler on the mouse button would count each click
// twice). It takes the keyboard focus, so keys typed next act on the view.
func (v *printView) Tapped(e *fyne.PointEvent) {
	v.takeFocus()
	at := v.toImage(e.Position)
	v.pressAt, v.lastAt = at, at
	v.click(at)
}

// takeFocus gives the keyboard to the view (out of a settings field).
func (v *printView) takeFocus() {
	if cv := fyne.CurrentApp().Driver().CanvasForObject(v); cv != nil && cv.Focused() != v {
		cv.Focus(v)
	}
}

// FocusGained and the other fyne.Focusable methods pass the keys to the
// controller while the view holds the focus.
func (v *printView) FocusGained()              {}
func (v *printView) FocusLost()                {}
func (v *printView) TypedRune(r rune)          { v.ctl.typedRune(r) }
func (v *printView) TypedKey(e *fyne.KeyEvent) { v.ctl.key(e.Name) }

// cancelGesture drops the gesture under way (Escape): nothing of it is
// applied, and the rest of a drag in progress is ignored.
func (v *printView) cancelGesture() {
	if v.dragging {
		v.cancelled = true
	}
	v.clearGesture()
	v.selX0, v.selX1 = 0, 0
	v.Refresh()
}

func (v *printView) click(at [2]float64) {
	m := v.ctl.m
	switch v.tool {
	case ToolScale:
		v.scaleClick = append(v.scaleClick, at)
		if len(v.scaleClick) == 2 {
			a, b := v.scaleClick[0], v.scaleClick[1]
			v.scaleClick = nil
			v.ctl.askScale(a, b)
		}
	default:
		v.selected = m.PanelAt(at[0], at[1])
		v.ctl.panelChosen(v.selected)
	}
	v.Refresh()
}

// Dragged follows the pointer.
func (v *printView) Dragged(e *fyne.DragEvent) {
	m := v.ctl.m
	if v.cancelled {
		return
	}
	if !v.dragging {
		v.takeFocus()
		v.dragging = true
		start := v.toImage(fyne.NewPos(e.Position.X-e.Dragged.DX, e.Position.Y-e.Dragged.DY))
		v.pressAt, v.lastAt = start, start
		v.selPanel = m.PanelAt(start[0], start[1])
		switch v.tool {
		case ToolShift:
			v.moving = v.selPanel >= 0 && v.selX1 > v.selX0 && start[0] >= v.selX0 && start[0] <= v.selX1 &&
				v.selPanel == m.PanelAt(v.selX0, start[1])
			if !v.moving {
				v.selX0, v.selX1 = start[0], start[0]
			}
		case ToolErase:
			v.selX0, v.selX1 = start[0], start[0]
		case ToolRedraw:
			v.stroke = [][2]float64{start}
		case ToolBox:
			v.grip = [4]bool{}
			// A drag starting on a box's edge or corner, inside or just
			// outside it, resizes that box.
			if p, g := v.gripped(start); p >= 0 {
				v.selPanel, v.grip = p, g
			}
		}
	}
	at := v.toImage(e.Position)
	switch v.tool {
	case ToolLook, ToolScale:
		v.pan(float64(e.Dragged.DX), float64(e.Dragged.DY))
		return
	case ToolShift:
		if v.moving {
			v.moveDY = at[1] - v.pressAt[1]
		} else {
			v.selX1 = at[0]
		}
	case ToolErase:
		v.selX1 = at[0]
	case ToolRedraw:
		v.stroke = append(v.stroke, at)
	case ToolBaseline, ToolBox, ToolPanel:
		v.moveDX, v.moveDY = at[0]-v.pressAt[0], at[1]-v.pressAt[1]
	}
	v.lastAt = at
	v.Refresh()
}

// DragEnd turns the gesture into an edit.
func (v *printView) DragEnd() {
	if v.cancelled {
		v.cancelled = false
		v.clearGesture()
		v.Refresh()
		return
	}
	if !v.dragging {
		return
	}
	v.dragging = false
	p := v.selPanel
	var err error
	edit := true // the gesture asked for an edit (a pan or a selection does not)
	switch v.tool {
	case ToolShift:
		edit = v.moving && math.Abs(v.moveDY) >= 0.5
		if edit {
			err = v.ctl.m.ShiftStretch(p, v.selX0, v.selX1, v.moveDY)
		}
		v.moving, v.moveDY = false, 0
	case ToolErase:
		err = v.ctl.m.Erase(p, v.selX0, v.selX1)
		v.selX0, v.selX1 = 0, 0
	case ToolRedraw:
		err = v.ctl.m.Redraw(p, v.stroke)
		v.stroke = nil
	case ToolBaseline:
		edit = math.Abs(v.moveDY) >= 0.5
		if edit {
			err = v.ctl.m.MoveBaseline(p, v.moveDY)
		}
	case ToolBox:
		edit = false // boxDragged reports, after asking when a neighbour is covered
		if p >= 0 && math.Hypot(v.moveDX, v.moveDY) >= 0.5 {
			v.ctl.boxDragged(p, v.boxAfterDrag(p))
		}
	case ToolPanel:
		edit = false // panelDrawn asks for the lead, then reports
		v.ctl.panelDrawn(v.drawnBox())
	default:
		edit = false
	}
	v.moveDX, v.moveDY = 0, 0
	if edit {
		v.ctl.edited(err)
	}
	v.Refresh()
}

// CreateRenderer draws the page and overlays into one raster, with the
// lead names as text on top.
func (v *printView) CreateRenderer() fyne.WidgetRenderer {
	r := &viewRenderer{v: v}
	r.raster = canvas.NewRaster(r.draw)
	r.raster.ScaleMode = canvas.ImageScalePixels
	r.hint = canvas.NewText("Open a printout: File ▸ Open, or drop an image here", theme.Color(theme.ColorNameForeground))
	r.scale = canvas.NewText("10 mm", scaleCol)
	r.scale.TextSize = theme.CaptionTextSize()
	return r
}
