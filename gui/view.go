package gui

import (
	"image"
	"image/color"
	"image/draw"
	"math"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"

	"tracelift/record"
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

type viewRenderer struct {
	v      *printView
	raster *canvas.Raster
	labels []*canvas.Text
	hint   *canvas.Text
	scale  *canvas.Text // names the scale bar
	buf    *image.NRGBA
}

func (r *viewRenderer) Destroy() {}

func (r *viewRenderer) Layout(sz fyne.Size) {
	r.raster.Resize(sz)
	if r.v.fit {
		r.v.fitNow()
	}
	r.placeLabels()
	hs := r.hint.MinSize()
	r.hint.Move(fyne.NewPos((sz.Width-hs.Width)/2, (sz.Height-hs.Height)/2))
}

func (r *viewRenderer) MinSize() fyne.Size { return fyne.NewSize(200, 150) }

func (r *viewRenderer) Objects() []fyne.CanvasObject {
	objs := []fyne.CanvasObject{r.raster}
	for _, l := range r.labels {
		objs = append(objs, l)
	}
	if r.v.src == nil {
		objs = append(objs, r.hint)
	} else if r.v.ctl.m.Loaded() && !r.v.hideOverlays {
		objs = append(objs, r.scale)
	}
	return objs
}

func (r *viewRenderer) Refresh() {
	if r.v.fit {
		r.v.fitNow()
	}
	r.placeLabels()
	r.hint.Color = theme.Color(theme.ColorNameForeground)
	r.raster.Refresh()
	for _, l := range r.labels {
		l.Refresh()
	}
}

func (r *viewRenderer) placeLabels() {
	v := r.v
	views := v.ctl.m.Panels()
	if !v.ctl.m.Loaded() {
		views = nil
	}
	if v.hideOverlays {
		views = nil
	}
	for len(r.labels) < len(views) {
		t := canvas.NewText("", labelColor)
		t.TextStyle = fyne.TextStyle{Bold: true}
		r.labels = append(r.labels, t)
	}
	r.labels = r.labels[:len(views)]
	if v.src != nil {
		// beside the 10 mm bar drawn in the raster's bottom-left corner
		y := math.Min((float64(v.src.Rect.Dy())-v.offY)*v.zoom, float64(v.Size().Height)) - 12
		x := (0-v.offX)*v.zoom + 12
		if a := v.ctl.m.Analysis(); a != nil {
			x += 10*a.PxPerMM*v.zoom + 6
		}
		r.scale.Move(fyne.NewPos(float32(x), float32(y)-r.scale.MinSize().Height/2))
	}
	for i, pv := range views {
		t := r.labels[i]
		name := pv.Lead
		if pv.Sign < 0 {
			name = "−" + name
		}
		if pv.Drawn {
			name += " (drawn by hand)"
		} else if printedLead(pv.Printed) != pv.Lead {
			name += " (read as " + pv.Printed + ")"
		}
		t.Text = name
		t.TextSize = theme.TextSize()
		t.Color = labelColor
		if i == v.selected {
			t.Color = selColor
		}
		x := float32((pv.Box[0] - v.offX) * v.zoom)
		y := float32((pv.Box[1] - v.offY) * v.zoom)
		t.Move(fyne.NewPos(x+4, y+2))
	}
}

var (
	labelColor = color.NRGBA{0x10, 0x4e, 0xb0, 0xff}
	selColor   = color.NRGBA{0xd0, 0x20, 0x90, 0xff}
	boxColor   = color.NRGBA{0x30, 0x70, 0xd0, 0xb0}
	baseColor  = color.NRGBA{0x60, 0x60, 0x60, 0xc0}
	strokeCol  = color.NRGBA{0xd0, 0x20, 0x90, 0xff}
	selBand    = color.NRGBA{0xff, 0xc0, 0x20, 0x50}
	scaleCol   = color.NRGBA{0x00, 0x80, 0x80, 0xff}
	halo       = color.NRGBA{0x10, 0x10, 0x18, 0xb0}
	plate      = color.NRGBA{0xff, 0xff, 0xff, 0xd8}
	erasedBand = color.NRGBA{0x90, 0x90, 0x90, 0x48}
	erasedCol  = color.NRGBA{0xb0, 0x20, 0x20, 0xe0}
	handleCol  = color.NRGBA{0xff, 0xff, 0xff, 0xff}
)

// confidenceColor: sure green, doubtful amber, poor red; unknown grey.
func confidenceColor(q float64) color.NRGBA {
	switch {
	case math.IsNaN(q):
		return color.NRGBA{0x70, 0x70, 0x70, 0xff}
	case q >= 0.75:
		return color.NRGBA{0x10, 0x9a, 0x3a, 0xff}
	case q >= 0.5:
		return color.NRGBA{0xe0, 0x90, 0x00, 0xff}
	default:
		return color.NRGBA{0xe0, 0x20, 0x20, 0xff}
	}
}

func (r *viewRenderer) draw(w, h int) image.Image {
	v := r.v
	if r.buf == nil || r.buf.Rect.Dx() != w || r.buf.Rect.Dy() != h {
		r.buf = image.NewNRGBA(image.Rect(0, 0, w, h))
	}
	dst := r.buf
	bg := theme.Color(theme.ColorNameBackground)
	draw.Draw(dst, dst.Rect, image.NewUniform(bg), image.Point{}, draw.Src)
	sz := v.Size()
	if v.src == nil || sz.Width <= 0 || w == 0 {
		return dst
	}
	// device px per screen unit (HiDPI)
	dev := float64(w) / float64(sz.Width)
	k := v.zoom * dev // device px per image px
	blitScaled(dst, v.src, v.offX, v.offY, k)

	m := v.ctl.m
	if !m.Loaded() || v.hideOverlays {
		return dst
	}
	toDev := func(p [2]float64) (float64, float64) { return (p[0] - v.offX) * k, (p[1] - v.offY) * k }
	lw := math.Max(1, dev*1.5)
	for i, pv := range m.Panels() {
		dx, dy := 0.0, 0.0
		b := pv.Box
		if v.dragging && i == v.selPanel && v.tool == ToolBox {
			b = v.boxAfterDrag(i)
			if v.grip == [4]bool{} {
				dx, dy = v.moveDX, v.moveDY
			}
		}
		x0, y0 := toDev([2]float64{b[0], b[1]})
		x1, y1 := toDev([2]float64{b[2], b[3]})
		c := boxColor
		if i == v.selected {
			c = selColor
		}
		rect(dst, x0, y0, x1, y1, math.Max(1, dev)+2*dev, halo)
		if pv.Drawn {
			dashed(dst, x0, y0, x1, y0, math.Max(1, dev)*2, c)
			dashed(dst, x0, y1, x1, y1, math.Max(1, dev)*2, c)
			rect(dst, x0, y0, x1, y1, math.Max(1, dev), c)
		} else {
			rect(dst, x0, y0, x1, y1, math.Max(1, dev), c)
		}
		if v.tool == ToolBox {
			// Handles at the corners and the middles of the edges: a drag
			// that starts on one resizes the box.
			hs := 3 * dev
			for _, hx := range []float64{x0, (x0 + x1) / 2, x1} {
				for _, hy := range []float64{y0, (y0 + y1) / 2, y1} {
					if hx == (x0+x1)/2 && hy == (y0+y1)/2 {
						continue
					}
					fill(dst, hx-hs-dev, hy-hs-dev, hx+hs+dev, hy+hs+dev, halo)
					fill(dst, hx-hs, hy-hs, hx+hs, hy+hs, handleCol)
				}
			}
		}
		bdy := dy
		if v.dragging && i == v.selPanel && v.tool == ToolBaseline {
			bdy = v.moveDY
		}
		_, by := toDev([2]float64{0, pv.BaselineY + bdy})
		dashed(dst, x0, by, x1, by, math.Max(1, dev), baseColor)

		col := confidenceColor(pv.Confidence)
		sdy := 0.0
		if v.tool == ToolShift && v.moving && i == v.selPanel {
			sdy = v.moveDY
		}
		lo, hi := math.Min(v.selX0, v.selX1), math.Max(v.selX0, v.selX1)
		// Each trace is drawn over a dark halo so that it stays visible on
		// a green, red or dark grid and on the ink it follows.
		for pass, c := range []color.NRGBA{halo, col} {
			w := lw
			if pass == 0 {
				w = lw + 2*dev
			}
			for _, run := range m.Polyline(i) {
				for j := 1; j < len(run); j++ {
					a, bb := run[j-1], run[j]
					oy := 0.0
					if sdy != 0 && a[0] >= lo && a[0] <= hi {
						oy = sdy
					}
					ax, ay := toDev([2]float64{a[0] + dx, a[1] + dy + oy})
					bx, by := toDev([2]float64{bb[0] + dx, bb[1] + dy + oy})
					line(dst, ax, ay, bx, by, w, c)
				}
			}
		}
		// Erased stretches: a hatched band, so a gap made by hand is not
		// taken for ink the tracer missed.
		for _, e := range m.Erased(i) {
			ex0, _ := toDev([2]float64{e[0] + dx, 0})
			ex1, _ := toDev([2]float64{e[1] + dx, 0})
			fill(dst, ex0, y0, ex1, y1, erasedBand)
			for x := ex0; x < ex1; x += 8 * dev {
				line(dst, x, by-6*dev, math.Min(x+8*dev, ex1), by+6*dev, math.Max(1, dev), erasedCol)
			}
		}
	}
	// selection band
	if (v.tool == ToolShift || v.tool == ToolErase) && v.selPanel >= 0 && v.selX1 != v.selX0 {
		b := m.Panels()[v.selPanel].Box
		x0, y0 := toDev([2]float64{math.Min(v.selX0, v.selX1), b[1]})
		x1, y1 := toDev([2]float64{math.Max(v.selX0, v.selX1), b[3]})
		fill(dst, x0, y0, x1, y1, selBand)
	}
	// the box of a New panel drag under way
	if v.tool == ToolPanel && v.dragging {
		b := v.drawnBox()
		x0, y0 := toDev([2]float64{b[0], b[1]})
		x1, y1 := toDev([2]float64{b[2], b[3]})
		fill(dst, x0, y0, x1, y1, selBand)
		rect(dst, x0, y0, x1, y1, math.Max(1, dev)+2*dev, halo)
		rect(dst, x0, y0, x1, y1, math.Max(1, dev), strokeCol)
	}
	for j := 1; j < len(v.stroke); j++ {
		ax, ay := toDev(v.stroke[j-1])
		bx, by := toDev(v.stroke[j])
		line(dst, ax, ay, bx, by, lw*1.3, strokeCol)
	}
	for _, p := range v.scaleClick {
		x, y := toDev(p)
		line(dst, x-6*dev, y, x+6*dev, y, lw, scaleCol)
		line(dst, x, y-6*dev, x, y+6*dev, lw, scaleCol)
	}
	// The grid scale found: a 10 mm bar in the corner of the page, on a
	// light plate so that it reads on a dark photo too.
	a := m.Analysis()
	if a.PxPerMM > 0 {
		x0, y0 := toDev([2]float64{0, float64(v.src.Rect.Dy())})
		x0 += 12 * dev
		y0 = math.Min(y0, float64(h)) - 12*dev
		bar := 10 * a.PxPerMM * k
		fill(dst, x0-6*dev, y0-11*dev, x0+bar+6*dev+float64(r.scale.MinSize().Width)*dev+4*dev, y0+9*dev, plate)
		line(dst, x0, y0, x0+bar, y0, 3*dev, scaleCol)
		line(dst, x0, y0-5*dev, x0, y0+5*dev, 2*dev, scaleCol)
		line(dst, x0+bar, y0-5*dev, x0+bar, y0+5*dev, 2*dev, scaleCol)
	}
	return dst
}

// printedLead is the standard name of a printed label, sign dropped.
func printedLead(s string) string {
	s = strings.TrimSpace(s)
	s = strings.TrimPrefix(strings.TrimPrefix(s, "-"), "−")
	return record.CanonicalLead(s)
}

// blitScaled draws src into dst with nearest-neighbour sampling: dst pixel
// (x, y) shows src pixel (offX + x/k, offY + y/k). Rows are walked through
// Pix directly.
func blitScaled(dst, src *image.NRGBA, offX, offY, k float64) {
	w, h := dst.Rect.Dx(), dst.Rect.Dy()
	sw, sh := src.Rect.Dx(), src.Rect.Dy()
	cols := make([]int, w)
	for x := range cols {
		sx := int(math.Floor(offX + (float64(x)+0.5)/k))
		if sx < 0 || sx >= sw {
			sx = -1
		}
		cols[x] = sx
	}
	for y := 0; y < h; y++ {
		sy := int(math.Floor(offY + (float64(y)+0.5)/k))
		if sy < 0 || sy >= sh {
			continue
		}
		srow := src.Pix[sy*src.Stride:]
		drow := dst.Pix[y*dst.Stride:]
		for x, sx := range cols {
			if sx < 0 {
				continue
			}
			copy(drow[4*x:4*x+4], srow[4*sx:4*sx+4])
		}
	}
}

func blend(dst *image.NRGBA, x, y int, c color.NRGBA) {
	if x < 0 || y < 0 || x >= dst.Rect.Dx() || y >= dst.Rect.Dy() {
		return
	}
	i := y*dst.Stride + 4*x
	a := uint32(c.A)
	p := dst.Pix[i : i+4]
	p[0] = uint8((uint32(c.R)*a + uint32(p[0])*(255-a)) / 255)
	p[1] = uint8((uint32(c.G)*a + uint32(p[1])*(255-a)) / 255)
	p[2] = uint8((uint32(c.B)*a + uint32(p[2])*(255-a)) / 255)
	p[3] = 255
}

// line draws a segment of width wd with a square brush.
func line(dst *image.NRGBA, x0, y0, x1, y1, wd float64, c color.NRGBA) {
	W, H := float64(dst.Rect.Dx()), float64(dst.Rect.Dy())
	if (x0 < -wd && x1 < -wd) || (x0 > W+wd && x1 > W+wd) || (y0 < -wd && y1 < -wd) || (y0 > H+wd && y1 > H+wd) {
		return
	}
	n := int(math.Ceil(math.Max(math.Abs(x1-x0), math.Abs(y1-y0))))
	if n > 20000 {
		return
	}
	r := int(math.Max(0, math.Round(wd/2-0.5)))
	for s := 0; s <= n; s++ {
		f := 0.0
		if n > 0 {
			f = float64(s) / float64(n)
		}
		cx, cy := int(math.Round(x0+f*(x1-x0))), int(math.Round(y0+f*(y1-y0)))
		for dy := -r; dy <= r; dy++ {
			for dx := -r; dx <= r; dx++ {
				setPx(dst, cx+dx, cy+dy, c)
			}
		}
	}
}

func setPx(dst *image.NRGBA, x, y int, c color.NRGBA) {
	if c.A == 255 {
		if x >= 0 && y >= 0 && x < dst.Rect.Dx() && y < dst.Rect.Dy() {
			i := y*dst.Stride + 4*x
			dst.Pix[i], dst.Pix[i+1], dst.Pix[i+2], dst.Pix[i+3] = c.R, c.G, c.B, 255
		}
		return
	}
	blend(dst, x, y, c)
}

func rect(dst *image.NRGBA, x0, y0, x1, y1, wd float64, c color.NRGBA) {
	line(dst, x0, y0, x1, y0, wd, c)
	line(dst, x1, y0, x1, y1, wd, c)
	line(dst, x1, y1, x0, y1, wd, c)
	line(dst, x0, y1, x0, y0, wd, c)
}

func dashed(dst *image.NRGBA, x0, y0, x1, y1, wd float64, c color.NRGBA) {
	const on, off = 6.0, 4.0
	L := math.Hypot(x1-x0, y1-y0)
	if L == 0 || L > 1e5 {
		return
	}
	for s := 0.0; s < L; s += on + off {
		e := math.Min(s+on, L)
		line(dst, x0+(x1-x0)*s/L, y0+(y1-y0)*s/L, x0+(x1-x0)*e/L, y0+(y1-y0)*e/L, wd, c)
	}
}

func fill(dst *image.NRGBA, x0, y0, x1, y1 float64, c color.NRGBA) {
	for y := int(math.Max(0, y0)); y < int(math.Min(float64(dst.Rect.Dy()), y1)); y++ {
		for x := int(math.Max(0, x0)); x < int(math.Min(float64(dst.Rect.Dx()), x1)); x++ {
			blend(dst, x, y, c)
		}
	}
}
