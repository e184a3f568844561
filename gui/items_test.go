package gui

import (
	"context"
	"errors"
	"image"
	"math"
	"strings"
	"testing"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/driver/desktop"
	"fyne.io/fyne/v2/test"

	"tracelift/gui/engine"
	"tracelift/gui/model"
	"tracelift/record"
)

// Screen position of image px (x, y) in the view.
func screenAt(v *printView, x, y float64) fyne.Position {
	return fyne.NewPos(float32((x-v.offX)*v.zoom), float32((y-v.offY)*v.zoom))
}

func shown(t *testing.T) *Controller {
	t.Helper()
	c := newTestController(t)
	c.ShowDemo()
	c.Wait()
	if !c.Model().Loaded() {
		t.Fatal("demo not shown")
	}
	return c
}

// One click is one point for the Scale tool: the view takes clicks from
// Tapped alone (a view that also handled the mouse button counted every
// click twice, so the dialog opened after the first click with two equal
// points), and Apply then reads the page at the scale the two lines give.
func TestScaleToolTwoClicks(t *testing.T) {
	c := shown(t)
	v := c.view
	if _, ok := any(v).(desktop.Mouseable); ok {
		t.Fatal("the view handles mouse buttons too: each click would count twice")
	}
	var got [][2]float64
	c.AskScale = func(a, b [2]float64) { got = append(got, a, b) }
	c.toolBar.SetSelected("Scale")
	test.TapCanvas(c.win.Canvas(), screenAt(v, 400, 300))
	if len(got) != 0 {
		t.Fatal("the scale was asked for after one click")
	}
	test.TapCanvas(c.win.Canvas(), screenAt(v, 600, 300))
	if len(got) != 2 || math.Abs((got[1][0]-got[0][0])-200) > 2 {
		t.Fatalf("clicked points %v, want 200 px apart", got)
	}
	// 200 px for 20 mm on a page read at 10 px/mm in both images: 10 px/mm.
	c.applyScale(got[0], got[1], "20")
	c.Wait()
	if s := c.Model().Settings(); math.Abs(s.PxPerMM-10) > 0.15 {
		t.Fatalf("scale set to %v px/mm, want 10 (status %q)", s.PxPerMM, c.status.Text)
	}
}

// Escape during a Redraw stroke drops the stroke: nothing is applied,
// and the rest of the drag is ignored.
func TestEscapeCancelsStroke(t *testing.T) {
	c := shown(t)
	v := c.view
	c.toolBar.SetSelected("Redraw")
	p0, p1, p2 := screenAt(v, 200, 480), screenAt(v, 260, 520), screenAt(v, 320, 470)
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: p0}})
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: p1}, Dragged: fyne.Delta{DX: p1.X - p0.X, DY: p1.Y - p0.Y}})
	c.key(fyne.KeyEscape)
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: p2}, Dragged: fyne.Delta{DX: p2.X - p1.X, DY: p2.Y - p1.Y}})
	v.DragEnd()
	if n := len(c.Model().Corrections()); n != 0 {
		t.Fatalf("%d corrections after Escape", n)
	}
	// The next stroke works as usual.
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: p0}})
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: p2}, Dragged: fyne.Delta{DX: p2.X - p0.X, DY: p2.Y - p0.Y}})
	v.DragEnd()
	if n := len(c.Model().Corrections()); n != 1 {
		t.Fatalf("%d corrections after a stroke, want 1", n)
	}
}

// A pan or a selection is no edit and says none.
func TestPanSaysNoEdit(t *testing.T) {
	c := shown(t)
	v := c.view
	c.setStatus("")
	for _, tool := range []string{"Look", "Shift"} {
		c.toolBar.SetSelected(tool)
		a, b := screenAt(v, 200, 500), screenAt(v, 300, 500)
		v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: a}})
		v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: b}, Dragged: fyne.Delta{DX: b.X - a.X}})
		v.DragEnd()
		if strings.Contains(c.status.Text, "Edit applied") {
			t.Fatalf("%s drag: status %q", tool, c.status.Text)
		}
	}
	if n := len(c.Model().Corrections()); n != 0 {
		t.Fatalf("%d corrections", n)
	}
}

// failsFor fails on one file name, like a picture that is no ECG.
type failsFor struct {
	*fakeBackend
	bad string
}

func (f failsFor) Analyze(ctx context.Context, src model.Source, s model.Settings, p model.Progress) (*model.Analysis, error) {
	if src.Name == f.bad {
		return nil, errors.New("calib: no ECG grid or trace found")
	}
	return f.fakeBackend.Analyze(ctx, src, s, p)
}

// After another file fails to open, "Read again with these" reads the page
// on screen, not the file that failed.
func TestRereadReadsPageOnScreen(t *testing.T) {
	a := test.NewTempApp(t)
	c := NewController(a, failsFor{newFake(t), "bad"}, model.Source{Name: "demo", Data: []byte{1}})
	c.win.Resize(fyne.NewSize(1200, 800))
	var failures []string
	c.Failure = func(name string, ex engine.Explanation, retry func(model.Settings)) {
		failures = append(failures, name)
	}
	c.ShowDemo()
	c.Wait()
	c.Open(model.Source{Name: "bad", Data: []byte{2}}, model.Found{})
	c.Wait()
	if len(failures) != 1 {
		t.Fatalf("failures %v", failures)
	}
	c.Reread(model.Settings{GainMMPerMV: 20})
	c.Wait()
	if n := c.Model().Source().Name; n != "demo" {
		t.Fatalf("read again: %s is open, want the demo on screen", n)
	}
	if g := c.Model().Settings().GainMMPerMV; g != 20 {
		t.Fatalf("settings %v", c.Model().Settings())
	}
	if len(failures) != 1 {
		t.Fatalf("the failed file was read again: %v", failures)
	}
}

// Opening another file gives the keyboard to the printout (out of the
// scale field) and scrolls the side tabs back to the top.
func TestNewFileResetsFocusAndScroll(t *testing.T) {
	c := shown(t)
	c.win.Canvas().Focus(c.side.pxPerMM)
	c.findings.obj.Offset = fyne.NewPos(0, 120)
	c.side.obj.Offset = fyne.NewPos(0, 80)
	c.Open(model.Source{Name: "second", Data: []byte{3}}, model.Found{})
	c.Wait()
	if f := c.win.Canvas().Focused(); f != fyne.Focusable(c.view) {
		t.Fatalf("focus is on %T, want the printout", f)
	}
	if c.findings.obj.Offset.Y != 0 || c.side.obj.Offset.Y != 0 {
		t.Fatalf("scroll kept: findings %v side %v", c.findings.obj.Offset, c.side.obj.Offset)
	}
	// + now zooms instead of typing into a field.
	z := c.view.zoom
	test.Type(c.view, "+")
	if !(c.view.zoom > z) {
		t.Fatal("+ did not zoom")
	}
}

// The window fits a 1366×768 screen at 1.6× scaling (854×480 units): the
// least size of its content stays within it, so the caution line and the
// status bar are never pushed off the screen.
func TestWindowFitsSmallScreen(t *testing.T) {
	c := shown(t)
	ms := c.win.Content().MinSize()
	if ms.Width > 1366/1.6 || ms.Height > 768/1.6 {
		t.Fatalf("the content needs %v units, more than 854×480", ms)
	}
}

// A box dragged over a neighbour asks first; No leaves it, Yes moves it.
// Dragging an edge resizes the box.
func TestBoxOverNeighbourAsks(t *testing.T) {
	c := shown(t)
	m := c.Model()
	i := 0 // lead I at x 50..675, y 50..350; aVR is to its right
	b := m.Panels()[i].Box
	over := [4]float64{b[0] + 300, b[1], b[2] + 300, b[3]}
	var asked []string
	answer := false
	c.Ask = func(title, msg string, f func(bool)) { asked = append(asked, msg); f(answer) }
	c.boxDragged(i, over)
	if len(asked) != 1 || !strings.Contains(asked[0], "aVR") || len(m.Corrections()) != 0 {
		t.Fatalf("asked %q, corrections %d", asked, len(m.Corrections()))
	}
	answer = true
	c.boxDragged(i, over)
	if len(m.Corrections()) != 1 {
		t.Fatal("Yes did not move the box")
	}
	// A small move inside its own place is not asked about.
	c.boxDragged(i, [4]float64{b[0] + 5, b[1], b[2] + 5, b[3]})
	if len(asked) != 2 || len(m.Corrections()) != 2 {
		t.Fatalf("asked %d times, %d corrections", len(asked), len(m.Corrections()))
	}
	// The right edge gripped: only x1 moves.
	g := gripAt(b, [2]float64{b[2] - 1, (b[1] + b[3]) / 2}, 4)
	if got := dragBox(b, g, -100, 7); got != [4]float64{b[0], b[1], b[2] - 100, b[3]} {
		t.Fatalf("resize gave %v from %v", got, b)
	}
	if got := dragBox(b, [4]bool{}, 10, 7); got != [4]float64{b[0] + 10, b[1] + 7, b[2] + 10, b[3] + 7} {
		t.Fatalf("move gave %v", got)
	}
}

// The overlay switch shows the page alone; with the overlays on, the
// traces and boxes are drawn, and an erased stretch is drawn as such.
func TestOverlaySwitch(t *testing.T) {
	c := shown(t)
	c.view.setImage(image.NewNRGBA(image.Rect(0, 0, 2600, 1000)))
	r := test.WidgetRenderer(c.view).(*viewRenderer)
	w, h := int(c.view.Size().Width), int(c.view.Size().Height)
	snap := func() []byte { return append([]byte(nil), r.draw(w, h).(*image.NRGBA).Pix...) }
	differ := func(a, b []byte) int {
		n := 0
		for i := 0; i+3 < len(a); i += 4 {
			if a[i] != b[i] || a[i+1] != b[i+1] || a[i+2] != b[i+2] {
				n++
			}
		}
		return n
	}
	on := snap()
	c.overlays.SetChecked(false)
	off := snap()
	c.overlays.SetChecked(true)
	if d := differ(on, off); d < 1000 {
		t.Fatalf("overlays on and off differ in %d px", d)
	}
	before := snap()
	if err := c.Model().Erase(4, 100, 400); err != nil { // lead II
		t.Fatal(err)
	}
	if len(c.Model().Erased(4)) != 1 {
		t.Fatalf("erased stretches %v", c.Model().Erased(4))
	}
	if differ(snap(), before) == 0 {
		t.Fatal("the erased stretch is not drawn")
	}
}

// The export dialog offers the formats and folder chosen last, in its own
// order.
func TestExportRemembersChoice(t *testing.T) {
	c := shown(t)
	dir := t.TempDir()
	c.export(dir, []string{"pdf", "wfdb", "csv"}, false)
	c.Wait()
	f, d := c.exportChoice()
	if strings.Join(f, ",") != "csv,wfdb,pdf" || d != dir {
		t.Fatalf("offered %v in %q, want csv,wfdb,pdf in %q", f, d, dir)
	}
}

// oneLead reads every source as a lone strip of lead II.
type oneLead struct{ *fakeBackend }

func (o oneLead) Analyze(ctx context.Context, src model.Source, s model.Settings, p model.Progress) (*model.Analysis, error) {
	a, err := o.fakeBackend.Analyze(ctx, src, s, p)
	if err != nil {
		return nil, err
	}
	ii := *a.Raw.Lead("II")
	a.Raw.Signals = []record.Signal{ii}
	a.Layout = "1x1"
	a.Panels = []model.Panel{{Lead: "II", Box: [4]float64{50, 50, 2550, 950}, BaselineY: 500, T0S: 0, T1S: 10}}
	return a, nil
}

// A single-lead strip gets no empty axis wheel: the findings show the
// measurements without it; a 12-lead page keeps it.
func TestSingleLeadNoAxisWheel(t *testing.T) {
	a := test.NewTempApp(t)
	c := NewController(a, oneLead{newFake(t)}, model.Source{Name: "strip", Data: []byte{1}})
	c.ShowDemo()
	c.Wait()
	if c.findings.dialBox.Visible() || c.findings.axesHead.Visible() {
		t.Fatal("the axis wheel is shown for a single lead")
	}
	c12 := shown(t)
	if !c12.findings.dialBox.Visible() {
		t.Fatal("the axis wheel is hidden on a 12-lead page")
	}
}

// noV3 reads every source without V3's panel (row 3, column 3 of the
// fake's 3×4 page: x 1300–1925, y 650–950), as if the reader had missed it.
type noV3 struct{ *fakeBackend }

func (o noV3) Analyze(ctx context.Context, src model.Source, s model.Settings, p model.Progress) (*model.Analysis, error) {
	a, err := o.fakeBackend.Analyze(ctx, src, s, p)
	if err != nil {
		return nil, err
	}
	var ps []model.Panel
	for _, pn := range a.Panels {
		if pn.Lead != "V3" {
			ps = append(ps, pn)
		}
	}
	a.Panels = ps
	var sg []record.Signal
	for _, sig := range a.Raw.Signals {
		if sig.Lead != "V3" {
			sg = append(sg, sig)
		}
	}
	a.Raw.Signals = sg
	return a, nil
}

func drag(v *printView, from, to [2]float64) {
	a, b := screenAt(v, from[0], from[1]), screenAt(v, to[0], to[1])
	mid := fyne.NewPos((a.X+b.X)/2, (a.Y+b.Y)/2)
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: mid}, Dragged: fyne.Delta{DX: mid.X - a.X, DY: mid.Y - a.Y}})
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: b}, Dragged: fyne.Delta{DX: b.X - mid.X, DY: b.Y - mid.Y}})
	v.DragEnd()
}

// The New panel tool: a box dragged on the page is offered the leads not
// on it; a lead already shown is refused with words that say so, the
// missing one is added as a drawn_panel correction and drawn as such,
// a box over a neighbour asks first, and undo takes the panel away.
func TestNewPanelTool(t *testing.T) {
	a := test.NewTempApp(t)
	c := NewController(a, noV3{newFake(t)}, model.Source{Name: "demo", Data: []byte{1}})
	c.win.Resize(fyne.NewSize(1200, 800))
	c.ShowDemo()
	c.Wait()
	m := c.Model()
	var offered []string
	name := "V4"
	c.AskLead = func(box [4]float64, missing []string, answer func(string)) {
		offered = missing
		answer(name)
	}
	c.toolBar.SetSelected("New panel")
	v := c.view
	drag(v, [2]float64{1310, 660}, [2]float64{1915, 940})
	if len(offered) != 1 || offered[0] != "V3" {
		t.Fatalf("offered %v, want V3", offered)
	}
	if len(m.Corrections()) != 0 || !strings.Contains(c.status.Text, "on the page already") {
		t.Fatalf("V4 again: status %q, %d corrections", c.status.Text, len(m.Corrections()))
	}
	name = "V3"
	drag(v, [2]float64{1310, 660}, [2]float64{1915, 940})
	cs := m.Corrections()
	if len(cs) != 1 || cs[0].Kind != record.CorrDrawnPanel || cs[0].Lead != "V3" {
		t.Fatalf("corrections %+v (status %q)", cs, c.status.Text)
	}
	last := m.Panels()[len(m.Panels())-1]
	if !last.Drawn || last.Lead != "V3" || math.Abs(last.Box[0]-1310) > 1 || math.Abs(last.Box[3]-940) > 1 {
		t.Fatalf("drawn panel %+v", last)
	}
	if n := len(m.MissingLeads()); n != 0 {
		t.Fatalf("%d leads still missing", n)
	}
	// Every lead has its panel now: nothing is offered.
	offered = nil
	drag(v, [2]float64{100, 100}, [2]float64{300, 300})
	if offered != nil || len(m.Corrections()) != 1 {
		t.Fatalf("offered %v with every lead shown", offered)
	}
	m.Undo()
	// A box over aVF's panel asks first.
	var asked []string
	c.Ask = func(title, msg string, f func(bool)) { asked = append(asked, msg); f(false) }
	drag(v, [2]float64{1000, 660}, [2]float64{1915, 940})
	if len(asked) != 1 || !strings.Contains(asked[0], "aVF") || len(m.Corrections()) != 0 {
		t.Fatalf("asked %q, %d corrections", asked, len(m.Corrections()))
	}
}

// In the Box tool a drag that starts on a box's edge handle resizes the
// box (the other edges stay), one that starts inside moves it.
func TestBoxHandleResizes(t *testing.T) {
	c := shown(t)
	m := c.Model()
	c.toolBar.SetSelected("Box")
	v := c.view
	b := m.Panels()[0].Box // lead I, x 50–675, y 50–350
	drag(v, [2]float64{b[2], 200}, [2]float64{b[2] - 100, 230})
	cs := m.Corrections()
	if len(cs) != 1 || cs[0].Kind != record.CorrBox {
		t.Fatalf("corrections %+v", cs)
	}
	got := m.Panels()[0].Box
	if math.Abs(got[2]-(b[2]-100)) > 1 || got[0] != b[0] || got[1] != b[1] || got[3] != b[3] {
		t.Fatalf("resized box %v from %v", got, b)
	}
	// Its window narrows with it: 100 px at 10 px/mm and 25 mm/s.
	if p := m.Panels()[0]; math.Abs(p.T1S-(2.5-0.4)) > 0.01 || p.T0S != 0 {
		t.Fatalf("window %.3f–%.3f s", p.T0S, p.T1S)
	}
	m.Undo()
	if m.Panels()[0].Box != b {
		t.Fatal("undo left the box resized")
	}
	drag(v, [2]float64{300, 200}, [2]float64{310, 200})
	if got := m.Panels()[0].Box; math.Abs(got[0]-(b[0]+10)) > 1 || math.Abs((got[2]-got[0])-(b[2]-b[0])) > 1e-6 {
		t.Fatalf("moved box %v from %v", got, b)
	}
}
