package gui

import (
	"context"
	"errors"
	"image"
	"math"
	"os"
	"path/filepath"
	"testing"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/driver/desktop"
	"fyne.io/fyne/v2/test"

	"tracelift/gui/model"
	"tracelift/record"
	"tracelift/record/wfdb"
)

// fakeBackend reads every source as the first 10 s of the PTB record
// s0010_re (PTB Diagnostic ECG Database, PhysioNet; ../shared/data) laid
// out as a 3×4 printout at 10 px/mm, 25 mm/s, 10 mm/mV, and "measures" a
// record by its count of missing samples and the mean of lead II, which
// any edit moves.
type fakeBackend struct{ raw *record.Record }

func newFake(t *testing.T) *fakeBackend {
	rec, err := wfdb.ReadRecord("../../shared/data/ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	raw := &record.Record{Name: "s0010_re"}
	for _, l := range record.Standard12 {
		s := rec.Lead(l).Resample(500)
		s.MV = s.MV[:5000]
		raw.Signals = append(raw.Signals, s)
	}
	return &fakeBackend{raw: raw}
}

var grid3x4 = [3][4]string{{"I", "aVR", "V1", "V4"}, {"II", "aVL", "V2", "V5"}, {"III", "aVF", "V3", "V6"}}

func (f *fakeBackend) Analyze(ctx context.Context, src model.Source, s model.Settings, p model.Progress) (*model.Analysis, error) {
	p("tracing", 0.5)
	a := &model.Analysis{Name: src.Name, Image: image.NewNRGBA(image.Rect(0, 0, 2600, 1000)),
		PxPerMM: 10, ImagePxPerMM: 10, GainMMPerMV: 10, SpeedMMPerS: 25, Layout: "3x4", ScaleSource: "grid",
		Quality: map[string]float64{}, Raw: f.raw.Clone()}
	if src.Path != "" {
		sha, err := model.FileSHA256(src.Path)
		if err != nil {
			return nil, err
		}
		a.ImageSHA256 = sha
	}
	for r := range 3 {
		for c := range 4 {
			x0, y0 := 50+float64(c)*625, 50+float64(r)*300
			a.Panels = append(a.Panels, model.Panel{Lead: grid3x4[r][c], Row: r, Col: c,
				Box: [4]float64{x0, y0, x0 + 625, y0 + 300}, BaselineY: y0 + 150, T0S: float64(c) * 2.5, T1S: float64(c+1) * 2.5})
			a.Quality[grid3x4[r][c]] = 0.9
		}
	}
	return a, nil
}

func (f *fakeBackend) Resignal(a *model.Analysis, ps []model.Panel) (*record.Record, []model.Panel, error) {
	return a.Raw.Clone(), ps, nil
}

func (f *fakeBackend) Measure(rec *record.Record, q map[string]float64) (*model.Summary, error) {
	gaps, sum, n := 0.0, 0.0, 0.0
	for i := range rec.Signals {
		for _, v := range rec.Signals[i].MV {
			if math.IsNaN(v) {
				gaps++
			} else if rec.Signals[i].Lead == "II" {
				sum += v
				n++
			}
		}
	}
	return &model.Summary{Values: []model.Value{
		{Key: "gaps", Label: "missing", V: gaps, SD: math.NaN()},
		{Key: "mean_ii", Label: "mean II", Unit: "µV", V: 1000 * sum / n, SD: math.NaN()},
	}, QRSAxisDeg: 60, PAxisDeg: math.NaN(), TAxisDeg: 40, Caution: model.Caution}, nil
}

func (f *fakeBackend) Export(a *model.Analysis, job model.ExportJob) ([]string, error) {
	return nil, errors.New("fake: no export")
}

func newTestController(t *testing.T) *Controller {
	a := test.NewTempApp(t)
	c := NewController(a, newFake(t), model.Source{Name: "demo", Data: []byte{1}})
	c.win.Resize(fyne.NewSize(1200, 800))
	return c
}

func bits(r *record.Record) []uint64 {
	var out []uint64
	for i := range r.Signals {
		for _, v := range r.Signals[i].MV {
			out = append(out, math.Float64bits(v))
		}
	}
	return out
}

func equalBits(a, b []uint64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

type shortcutTyper interface{ TypedShortcut(fyne.Shortcut) }

// Drag an erase across lead II in the view, see the record and findings
// change, then Ctrl+Z and Ctrl+Shift+Z through the window's shortcuts.
func TestControllerEraseUndoRedo(t *testing.T) {
	c := newTestController(t)
	c.ShowDemo()
	c.Wait()
	m := c.Model()
	if !m.Loaded() {
		t.Fatal("demo not shown")
	}
	raw := bits(m.Record())
	before, _ := m.Summary().Get("gaps")

	c.toolBar.SetSelected("Erase")
	if c.view.tool != ToolErase {
		t.Fatal("tool not chosen")
	}
	// Screen position of image px (200, 500): inside lead II's panel.
	v := c.view
	at := func(x, y float64) fyne.Position {
		return fyne.NewPos(float32((x-v.offX)*v.zoom), float32((y-v.offY)*v.zoom))
	}
	start, end := at(200, 500), at(300, 500)
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: start}, Dragged: fyne.Delta{}})
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: end}, Dragged: fyne.Delta{DX: end.X - start.X}})
	v.DragEnd()
	after, _ := m.Summary().Get("gaps")
	if !(after.V > before.V) {
		t.Fatalf("gaps %v -> %v: the erase did not reach the findings", before.V, after.V)
	}
	// About 100 px at 250 px/s = 0.4 s = 200 samples at 500 Hz.
	if d := after.V - before.V; d < 150 || d > 250 {
		t.Fatalf("%v samples erased, want about 200", d)
	}
	if len(m.Changes()) == 0 || m.Corrections()[0].Lead != "II" {
		t.Fatalf("changes %v corrections %v", m.Changes(), m.Corrections())
	}
	edited := bits(m.Record())

	// The shortcuts as fyne's desktop driver sends them (fyne v2.7.1,
	// internal/driver/glfw/window.go triggersShortcut): Ctrl+Z arrives as
	// fyne.ShortcutUndo, Ctrl+Y as fyne.ShortcutRedo, Ctrl+Shift+Z as a
	// custom shortcut. The real keys are pressed in cmd/tracelift's
	// window test.
	sc := c.win.Canvas().(shortcutTyper)
	sc.TypedShortcut(&fyne.ShortcutUndo{})
	if !equalBits(bits(m.Record()), raw) {
		t.Fatal("Ctrl+Z did not restore the raw record bit for bit")
	}
	sc.TypedShortcut(&desktop.CustomShortcut{KeyName: fyne.KeyZ, Modifier: fyne.KeyModifierControl | fyne.KeyModifierShift})
	if !equalBits(bits(m.Record()), edited) {
		t.Fatal("Ctrl+Shift+Z did not redo the erase")
	}
	sc.TypedShortcut(&fyne.ShortcutUndo{})
	sc.TypedShortcut(&fyne.ShortcutRedo{})
	if !equalBits(bits(m.Record()), edited) {
		t.Fatal("Ctrl+Y did not redo the erase")
	}
	// The findings tab shows the caution with the measurements.
	if c.findings.values.Text == "" || !containsCaution(c) {
		t.Fatal("findings or caution missing")
	}
}

func containsCaution(c *Controller) bool {
	return c.findings.caution.Text == model.Caution && c.findings.caution.Visible()
}

// A file with edits autosaves its project; opening it again restores the
// corrections exactly.
func TestControllerProjectReopens(t *testing.T) {
	dir := t.TempDir()
	img := filepath.Join(dir, "strip.png")
	if err := os.WriteFile(img, []byte("image bytes"), 0o644); err != nil {
		t.Fatal(err)
	}
	c := newTestController(t)
	c.OpenPath(img)
	c.Wait()
	m := c.Model()
	if !m.Loaded() {
		t.Fatal("file not opened")
	}
	if err := m.ShiftStretch(0, 100, 200, 40); err != nil {
		t.Fatal(err)
	}
	c.edited(nil)
	if err := m.Assign(1, "aVL"); err != nil {
		t.Fatal(err)
	}
	want := bits(m.Record())
	if _, err := os.Stat(model.ProjectPath(img)); err != nil {
		t.Fatalf("no project file: %v", err)
	}

	c2 := newTestController(t)
	c2.OpenPath(img)
	c2.Wait()
	if got := c2.Model().Corrections(); len(got) != 2 {
		t.Fatalf("%d corrections restored, want 2", len(got))
	}
	if !equalBits(bits(c2.Model().Record()), want) {
		t.Fatal("reopened record differs")
	}

	// Change the image: the project no longer matches and the user is asked.
	os.WriteFile(img, []byte("other image bytes"), 0o644)
	asked := false
	c3 := newTestController(t)
	c3.Ask = func(title, msg string, answer func(bool)) { asked = true; answer(false) }
	c3.OpenPath(img)
	c3.Wait()
	if !asked {
		t.Fatal("a project for another image was used without asking")
	}
	if n := len(c3.Model().Corrections()); n != 0 {
		t.Fatalf("%d corrections applied after saying no", n)
	}
	kept, _ := filepath.Glob(filepath.Join(dir, "strip.png.tracelift-*.json"))
	if len(kept) != 1 {
		t.Fatalf("the old project was not kept aside: %v", kept)
	}
}

// Settings typed on the Reading tab re-read the printout, are kept in the
// project with the corrections, and come back on reopening.
func TestControllerSettingsKept(t *testing.T) {
	dir := t.TempDir()
	img := filepath.Join(dir, "page.png")
	os.WriteFile(img, []byte("page bytes"), 0o644)
	c := newTestController(t)
	c.OpenPath(img)
	c.Wait()
	if err := c.Model().Erase(0, 100, 150); err != nil {
		t.Fatal(err)
	}
	c.side.gain.SetText("20")
	c.side.applySettings()
	c.Wait()
	if g := c.Model().Settings().GainMMPerMV; g != 20 {
		t.Fatalf("gain setting %v, want 20", g)
	}
	if n := len(c.Model().Corrections()); n != 1 {
		t.Fatalf("%d corrections after the re-read, want 1", n)
	}
	c.side.gain.SetText("ten")
	c.side.applySettings()
	c.Wait()
	if g := c.Model().Settings().GainMMPerMV; g != 20 {
		t.Fatalf("a bad number changed the gain to %v", g)
	}
	c2 := newTestController(t)
	c2.OpenPath(img)
	c2.Wait()
	if g := c2.Model().Settings().GainMMPerMV; g != 20 || len(c2.Model().Corrections()) != 1 {
		t.Fatalf("reopened: gain %v, %d corrections", g, len(c2.Model().Corrections()))
	}
}

// The wheel zooms about the pointer, the arrow keys and a Look drag pan,
// and "0" shows the whole page again.
func TestControllerZoomAndPan(t *testing.T) {
	c := newTestController(t)
	c.ShowDemo()
	c.Wait()
	v := c.view
	v.Resize(fyne.NewSize(800, 500))
	v.fitNow()
	z0 := v.zoom
	p := fyne.NewPos(400, 250)
	at := v.toImage(p)
	v.Scrolled(&fyne.ScrollEvent{PointEvent: fyne.PointEvent{Position: p}, Scrolled: fyne.Delta{DY: 200}})
	if !(v.zoom > z0) {
		t.Fatalf("wheel up did not zoom in: %v -> %v", z0, v.zoom)
	}
	if got := v.toImage(p); math.Abs(got[0]-at[0]) > 1e-6 || math.Abs(got[1]-at[1]) > 1e-6 {
		t.Fatalf("zoom moved the point under the pointer: %v -> %v", at, got)
	}
	x0 := v.offX
	c.key(fyne.KeyRight)
	if !(v.offX > x0) {
		t.Fatal("right arrow did not pan")
	}
	x1 := v.offX
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: fyne.NewPos(300, 200)}, Dragged: fyne.Delta{DX: 50}})
	v.DragEnd()
	if !(v.offX < x1) {
		t.Fatal("a Look drag to the right did not pan")
	}
	c.win.Canvas().(interface{ OnTypedRune() func(rune) }).OnTypedRune()('0')
	if !v.fit {
		t.Fatal("0 did not return to the whole page")
	}
}

// needsScale fails like calib does on a page without a grid, until the
// scale is given by hand.
type needsScale struct{ *fakeBackend }

func (n needsScale) Analyze(ctx context.Context, src model.Source, s model.Settings, p model.Progress) (*model.Analysis, error) {
	if s.PxPerMM == 0 {
		return nil, errors.New("calib: no grid or calibration pulse found")
	}
	return n.fakeBackend.Analyze(ctx, src, s, p)
}

// A reading that fails for want of a scale can be tried again with the
// scale typed on the Reading tab.
func TestControllerRetryWithScale(t *testing.T) {
	a := test.NewTempApp(t)
	c := NewController(a, needsScale{newFake(t)}, model.Source{Name: "fax", Data: []byte{1}})
	var errs []error
	c.OnLoaded = func(err error) { errs = append(errs, err) }
	c.ShowDemo()
	c.Wait()
	if c.Model().Loaded() || len(errs) != 1 || errs[0] == nil {
		t.Fatalf("loaded %v, reports %v", c.Model().Loaded(), errs)
	}
	c.side.pxPerMM.SetText("8")
	c.side.applySettings()
	c.Wait()
	if !c.Model().Loaded() || c.Model().Settings().PxPerMM != 8 {
		t.Fatalf("retry with a scale: loaded %v, settings %+v", c.Model().Loaded(), c.Model().Settings())
	}
}
