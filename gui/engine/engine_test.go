package engine

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"testing"

	"tracelift/gui/model"
	"tracelift/record/wfdb"
)

// The demo printout reads through the real pipeline, and re-deriving the
// signals with the panels where the digitizer put them gives back the
// digitizer's own record (the box clipping drops nothing that was inside
// the boxes).
func TestDemoReadsAndResignalIsNeutral(t *testing.T) {
	if testing.Short() {
		t.Skip("reads a 300-dpi page")
	}
	src, err := Demo()
	if err != nil {
		t.Fatal(err)
	}
	b := &Backend{}
	a, err := b.Analyze(context.Background(), src, model.Settings{}, func(string, float64) {})
	if err != nil {
		t.Fatal(err)
	}
	if len(a.Panels) == 0 || a.Image == nil || !(a.PxPerMM > 0) || len(a.ImageSHA256) != 64 {
		t.Fatalf("analysis incomplete: %d panels, px/mm %v", len(a.Panels), a.PxPerMM)
	}
	rec, _, err := b.Resignal(a, a.Panels)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range a.Raw.Signals {
		r := rec.Lead(s.Lead)
		if r == nil || r.Len() != s.Len() {
			t.Fatalf("lead %s missing or resized after a neutral re-derivation", s.Lead)
		}
		for k := range s.MV {
			x, y := s.MV[k], r.MV[k]
			if math.IsNaN(x) != math.IsNaN(y) || (!math.IsNaN(x) && math.Abs(x-y) > 1e-9) {
				t.Fatalf("lead %s sample %d: %v vs %v", s.Lead, k, x, y)
			}
		}
	}
	// A context already cancelled stops the reading with its error.
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := b.Analyze(ctx, src, model.Settings{}, func(string, float64) {}); err == nil {
		t.Fatal("a cancelled reading succeeded")
	}
}

// Measuring a real record through the backend fills the values under the
// keys of the CLI's JSON contract (DEVELOPERS.md), with the caution.
func TestMeasureKeysAndCaution(t *testing.T) {
	rec, err := wfdb.ReadRecord("../../../shared/data/ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	s, err := (&Backend{}).Measure(rec, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"heart_rate_bpm", "pr", "qrs", "qt", "qtc_bazett", "qtc_fridericia", "qtc_framingham", "qtc_hodges", "qrs_deg", "p_deg", "t_deg"} {
		if _, ok := s.Get(k); !ok {
			t.Errorf("no %s", k)
		}
	}
	hr, _ := s.Get("heart_rate_bpm")
	// Only a plausibility bound: a resting adult's rate lies between 30
	// and 200 bpm (common practice); the engine's own accuracy is tested
	// in package axis.
	if !(hr.V > 30 && hr.V < 200) {
		t.Errorf("heart rate %v", hr.V)
	}
	if s.Caution != model.Caution {
		t.Errorf("caution %q", s.Caution)
	}
}

// Export writes the chosen formats of the corrected record.
func TestExport(t *testing.T) {
	if testing.Short() {
		t.Skip("reads a 300-dpi page")
	}
	src, _ := Demo()
	b := &Backend{}
	a, err := b.Analyze(context.Background(), src, model.Settings{}, func(string, float64) {})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	files, err := b.Export(a, a.Raw, dir, "demo", []string{"csv", "json"})
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{"demo.csv", "demo.json"} {
		if st, err := os.Stat(filepath.Join(dir, f)); err != nil || st.Size() == 0 {
			t.Fatalf("%s not written (%v); files %v", f, err, files)
		}
	}
}

// Moving a panel's box through the model re-derives that lead with the
// real digitizer: narrowing the box to its left half leaves the right half
// of the panel's window as a gap, and undo gives the reading back exactly.
func TestBoxMoveRederives(t *testing.T) {
	if testing.Short() {
		t.Skip("reads a 300-dpi page")
	}
	src, _ := Demo()
	b := &Backend{}
	a, err := b.Analyze(context.Background(), src, model.Settings{}, func(string, float64) {})
	if err != nil {
		t.Fatal(err)
	}
	m := model.New(b)
	if err := m.Install(src, a, model.Settings{}, nil, ""); err != nil {
		t.Fatal(err)
	}
	i := -1
	for k, p := range m.Panels() {
		if !p.Rhythm && m.Record().Lead(p.Lead) != nil {
			i = k
			break
		}
	}
	if i < 0 {
		t.Skip("the demo reading has no plain panel")
	}
	p := m.Panels()[i]
	gaps := func() int {
		s := m.Record().Lead(p.Lead)
		n := 0
		for _, v := range s.MV {
			if math.IsNaN(v) {
				n++
			}
		}
		return n
	}
	before := gaps()
	box := p.Box
	box[2] = (box[0] + box[2]) / 2
	if err := m.MoveBox(i, box); err != nil {
		t.Fatal(err)
	}
	after := gaps()
	// Half the panel's window at the record's rate is lost (give or take
	// the trace's own ends).
	half := int((p.T1S - p.T0S) / 2 * m.Record().Lead(p.Lead).RateHz)
	if after-before < half*8/10 {
		t.Fatalf("lead %s: gaps %d -> %d, want about %d more", p.Lead, before, after, half)
	}
	m.Undo()
	if gaps() != before {
		t.Fatalf("undo: %d gaps, want %d", gaps(), before)
	}
}
