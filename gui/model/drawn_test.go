package model

import (
	"context"
	"errors"
	"path/filepath"
	"testing"

	"tracelift/record"
)

// openWithout opens the fake reading with lead's panel and signal left
// out, as if the reader had missed that panel.
func openWithout(t *testing.T, lead, projectPath string) *Model {
	t.Helper()
	f := newFake(t)
	a, err := f.Analyze(context.Background(), Source{Name: "fake"}, Settings{}, func(string, float64) {})
	if err != nil {
		t.Fatal(err)
	}
	var ps []Panel
	for _, p := range a.Panels {
		if p.Lead != lead {
			ps = append(ps, p)
		}
	}
	a.Panels = ps
	var ss []record.Signal
	for _, s := range a.Raw.Signals {
		if s.Lead != lead {
			ss = append(ss, s)
		}
	}
	a.Raw.Signals = ss
	m := New(f)
	if err := m.Install(Source{Name: "fake"}, a, Settings{}, nil, projectPath); err != nil {
		t.Fatal(err)
	}
	return m
}

// A panel drawn by hand joins the panels after the reader's, under its
// name through later reassignments (a swap renames it as record.Apply
// renames the signals), can be resized and erased on like any other, and
// goes and comes back with undo and redo; its correction survives the
// project file.
func TestDrawnPanelNamesAndUndo(t *testing.T) {
	proj := filepath.Join(t.TempDir(), "p.json")
	m := openWithout(t, "V3", proj)
	if got := m.MissingLeads(); len(got) != 1 || got[0] != "V3" {
		t.Fatalf("missing %v", got)
	}
	box := [4]float64{1300, 650, 1925, 950}
	for _, bad := range []string{"V2", "aVX", "-II", " "} {
		if err := m.AddPanel(box, bad); !errors.Is(err, ErrNotLead) && !errors.Is(err, ErrLeadShown) {
			t.Errorf("%q: %v", bad, err)
		}
	}
	if err := m.AddPanel(box, " v3 "); err != nil {
		t.Fatal(err)
	}
	i := len(m.Panels()) - 1
	if v := m.Panels()[i]; !v.Drawn || v.Lead != "V3" || v.Box != box || v.Sign != 1 || len(m.Panels()) != 12 {
		t.Fatalf("drawn panel %+v of %d", v, len(m.Panels()))
	}
	// V2 and the drawn V3 swap names.
	v2 := -1
	for k, v := range m.Panels() {
		if v.Lead == "V2" {
			v2 = k
		}
	}
	if err := m.Assign(i, "V2"); err != nil {
		t.Fatal(err)
	}
	if m.Panels()[i].Lead != "V2" || m.Panels()[v2].Lead != "V3" {
		t.Fatalf("after the swap: drawn %s, V2's panel %s", m.Panels()[i].Lead, m.Panels()[v2].Lead)
	}
	// Resized under its new name; erased on.
	small := box
	small[2] = 1600
	if err := m.MoveBox(i, small); err != nil {
		t.Fatal(err)
	}
	if v := m.Panels()[i]; v.Box != small {
		t.Fatalf("resized drawn panel %v", v.Box)
	}
	if err := m.Erase(i, 1350, 1400); err != nil {
		t.Fatal(err)
	}
	if len(m.Erased(i)) != 1 || len(m.Erased(v2)) != 0 {
		t.Fatalf("erased: drawn %v, V2's %v", m.Erased(i), m.Erased(v2))
	}
	p, err := ReadProjectFile(proj)
	if err != nil || len(p.Corrections) != 4 || p.Corrections[0].Kind != record.CorrDrawnPanel {
		t.Fatalf("project %+v, %v", p, err)
	}
	for range 4 {
		m.Undo()
	}
	if len(m.Panels()) != 11 || len(m.MissingLeads()) != 1 {
		t.Fatalf("undo all: %d panels", len(m.Panels()))
	}
	for range 4 {
		m.Redo()
	}
	if v := m.Panels()[i]; !v.Drawn || v.Lead != "V2" || v.Box != small {
		t.Fatalf("redo all: %+v", v)
	}
}

// Cabrera's inverted aVR (common practice on Cabrera printouts) can be
// drawn by hand as "-aVR": the panel shows aVR turned over.
func TestDrawnPanelInvertedAVR(t *testing.T) {
	m := openWithout(t, "aVR", "")
	if err := m.AddPanel([4]float64{675, 50, 1300, 350}, "−aVR"); err != nil {
		t.Fatal(err)
	}
	v := m.Panels()[len(m.Panels())-1]
	if v.Lead != "aVR" || v.Sign != -1 || !v.Drawn {
		t.Fatalf("drawn -aVR: %+v", v)
	}
}
