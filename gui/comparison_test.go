package gui

import (
	"context"
	"os"
	"path/filepath"
	"testing"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/test"
	"fyne.io/fyne/v2/widget"

	"tracelift/compare"
	"tracelift/gui/engine"
	"tracelift/gui/model"
)

// comparingFake reads every page as the fake does (PTB s0010_re's first
// 10 s) and compares through the real engine, whose CompareWith and
// PrintComparison need no page.
type comparingFake struct {
	*fakeBackend
	eng *engine.Backend
}

func (f comparingFake) CompareWith(ctx context.Context, e model.Source, cur model.Current, p model.Progress) (*model.Comparison, error) {
	return f.eng.CompareWith(ctx, e, cur, p)
}

func (f comparingFake) PrintComparison(c *model.Comparison, path, paper string) (string, error) {
	return f.eng.PrintComparison(c, path, paper)
}

// labels lists the texts of every label under o.
func labels(o fyne.CanvasObject) []string {
	var out []string
	switch w := o.(type) {
	case *widget.Label:
		out = append(out, w.Text)
	case *fyne.Container:
		for _, c := range w.Objects {
			out = append(out, labels(c)...)
		}
	case *container.Scroll:
		out = append(out, labels(w.Content)...)
	case *container.Split:
		out = append(out, labels(w.Leading)...)
		out = append(out, labels(w.Trailing)...)
	}
	return out
}

func has(list []string, s string) bool {
	for _, l := range list {
		if l == s {
			return true
		}
	}
	return false
}

// The comparison of the tracing on screen (PTB s0010_re's first 10 s, PTB
// Diagnostic ECG Database, PhysioNet) with the record's own WFDB header
// opens a window of its own that shows the caution, the two tracings
// named, nothing raised, every lead's beats, and can shrink to a small
// screen; printing it writes the page
// beside a file of that name already there, which is left as it was.
func TestComparisonWindow(t *testing.T) {
	a := test.NewTempApp(t)
	c := NewController(a, comparingFake{newFake(t), &engine.Backend{}}, model.Source{Name: "demo", Data: []byte{1}})
	c.ShowDemo()
	c.Wait()
	var shown error = errNotYet
	c.OnCompared = func(err error) { shown = err }
	c.CompareWith("../../shared/data/ptb-s0010_re/s0010_re.hea")
	c.Wait()
	if shown != nil {
		t.Fatalf("comparison not shown: %v", shown)
	}
	w := c.ComparisonWindow()
	if w == nil {
		t.Fatal("no comparison window")
	}
	texts := labels(w.Content())
	for _, want := range []string{compare.Caution, "A, earlier: s0010_re.hea, a record file", "B, current: demo, a digitized picture (as on screen when compared)", "Changes raised: 0"} {
		if !has(texts, want) {
			t.Errorf("the window lacks %q; it shows %q", want, texts)
		}
	}
	// The window can shrink to a 1366×768 screen at 1.6× scaling (854×480
	// units, the main window's goal): its parts scroll or wrap.
	if ms := w.Content().MinSize(); ms.Width > 854 || ms.Height > 480 {
		t.Errorf("the comparison window needs at least %v", ms)
	}
	if n := len(c.cmpShown.Beats); n != 12 {
		t.Errorf("%d leads' beats, want 12", n)
	}

	dir := t.TempDir()
	mine := filepath.Join(dir, "cmp.pdf")
	if err := os.WriteFile(mine, []byte("kept"), 0o644); err != nil {
		t.Fatal(err)
	}
	var wrote string
	c.OnPrinted = func(f string, err error) {
		if err != nil {
			t.Errorf("print: %v", err)
		}
		wrote = f
	}
	c.PrintComparison(mine, "a4", false)
	c.Wait()
	if wrote != filepath.Join(dir, "cmp-2.pdf") {
		t.Errorf("printed to %q", wrote)
	}
	if b, _ := os.ReadFile(mine); string(b) != "kept" {
		t.Errorf("the file already there was changed")
	}
	// Opening another tracing closes the comparison of the one before.
	img := filepath.Join(dir, "other.png")
	if err := os.WriteFile(img, []byte("image bytes"), 0o644); err != nil {
		t.Fatal(err)
	}
	c.OpenPath(img)
	c.Wait()
	c.Wait()
	if c.ComparisonWindow() != nil {
		t.Error("the comparison window stayed open over another tracing")
	}
}

// With a backend that cannot compare, asking says so and opens nothing.
func TestComparisonNeedsComparer(t *testing.T) {
	c := newTestController(t)
	c.ShowDemo()
	c.Wait()
	var got error
	c.OnCompared = func(err error) { got = err }
	c.CompareWith("../../shared/data/ptb-s0010_re/s0010_re.hea")
	c.Wait()
	if got == nil || c.ComparisonWindow() != nil {
		t.Fatalf("compared without a comparer (%v)", got)
	}
}

var errNotYet = errorString("not shown yet")

type errorString string

func (e errorString) Error() string { return string(e) }
