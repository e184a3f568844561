package engine

import (
	"context"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"tracelift/gui/model"
	"tracelift/record"
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

// Export writes every format from what the screen shows after a
// correction: the PDF's text (read back with poppler's pdftotext, a tool
// outside the project) carries the measurements the model shows after the
// correction, the WFDB record holds the corrected signals and the JSON
// lists the correction.
func TestExportEveryFormatAfterCorrection(t *testing.T) {
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
	before := m.Summary()
	if before == nil {
		t.Fatalf("the demo is not measured: %v", m.MeasureErr())
	}
	// Say the panel read as I is lead aVR (the two swap names): the frontal
	// QRS axis moves far, I standing at 0° and aVR at −150° on the
	// hexaxial reference (common practice).
	i := -1
	for k, p := range m.Panels() {
		if p.Lead == "I" && !p.Rhythm {
			i = k
		}
	}
	if i < 0 {
		t.Fatal("the demo reading has no panel of lead I")
	}
	if err := m.Assign(i, "aVR"); err != nil {
		t.Fatal(err)
	}
	after := m.Summary()
	if after == nil {
		t.Fatalf("not measured after the correction: %v", m.MeasureErr())
	}
	qb, _ := before.Get("qrs_deg")
	qa, _ := after.Get("qrs_deg")
	if !(math.Abs(qa.V-qb.V) > 10) {
		t.Fatalf("the swap did not move the QRS axis (%v -> %v); pick another correction", qb.V, qa.V)
	}
	dir := t.TempDir()
	files, err := b.Export(m.Analysis(), m.ExportJob(dir, "demo", []string{"csv", "wfdb", "edf", "json", "pdf"}))
	if err != nil {
		t.Fatalf("export: %v (wrote %v)", err, files)
	}
	for _, f := range []string{"demo.csv", "demo.hea", "demo.dat", "demo.edf", "demo.json", "demo.pdf"} {
		if st, err := os.Stat(filepath.Join(dir, f)); err != nil || st.Size() == 0 {
			t.Fatalf("%s not written (%v); files %v", f, err, files)
		}
	}

	// The PDF shows the axis measured after the correction, not before.
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Skip("pdftotext (poppler-utils) not installed")
	}
	out, err := exec.Command("pdftotext", "-layout", filepath.Join(dir, "demo.pdf"), "-").Output()
	if err != nil {
		t.Fatalf("pdftotext: %v", err)
	}
	text := string(out)
	t.Logf("QRS axis %.0f° -> %.0f°", qb.V, qa.V)
	axisRow := func(deg float64) *regexp.Regexp {
		return regexp.MustCompile(fmt.Sprintf(`QRS\s+[+−-]?%.0f°`, math.Abs(deg)))
	}
	if !axisRow(qa.V).MatchString(text) {
		t.Errorf("the PDF does not show the corrected QRS axis %.0f°:\n%s", qa.V, text)
	}
	if axisRow(qb.V).MatchString(text) {
		t.Errorf("the PDF shows the QRS axis before the correction, %.0f°", qb.V)
	}
	for _, key := range []string{"heart_rate_bpm", "qrs", "qtc_bazett"} {
		v, _ := after.Get(key)
		if !regexp.MustCompile(fmt.Sprintf(`\b%.0f\b`, v.V)).MatchString(text) {
			t.Errorf("the PDF does not show %s = %.0f", key, v.V)
		}
	}
	if !strings.Contains(strings.Join(strings.Fields(text), " "), "Not a diagnostic device") {
		t.Errorf("the PDF lacks the caution")
	}

	// The signal files hold the corrected record: aVR is now what was
	// read as I.
	rec := m.Record()
	got, err := wfdb.ReadRecord(filepath.Join(dir, "demo.hea"))
	if err != nil {
		t.Fatal(err)
	}
	cmpLead(t, "WFDB", rec.Lead("aVR"), got.Lead("aVR"))
	js, err := os.ReadFile(filepath.Join(dir, "demo.json"))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(js), `"new_lead": "aVR"`) {
		t.Errorf("the JSON does not list the reassignment")
	}
}

// cmpLead compares a written lead with the corrected one sample by sample
// over the written one's length (WFDB stores 16-bit µV: 1 µV steps).
func cmpLead(t *testing.T, what string, want, got *record.Signal) {
	t.Helper()
	if want == nil || got == nil {
		t.Fatalf("%s: lead missing (want %v, got %v)", what, want != nil, got != nil)
	}
	w := want.Resample(got.RateHz)
	off := int(math.Round(w.StartS * got.RateHz))
	n, bad := 0, 0
	for k, v := range w.MV {
		j := off + k
		if j < 0 || j >= len(got.MV) || math.IsNaN(v) || math.IsNaN(got.MV[j]) {
			continue
		}
		n++
		if math.Abs(v-got.MV[j]) > 0.002 {
			bad++
		}
	}
	if n < 100 || bad > 0 {
		t.Fatalf("%s: %d of %d samples differ by more than 2 µV", what, bad, n)
	}
}

// Moving a panel's box through the model re-derives that lead with the
// real digitizer: narrowing the box to its left half leaves the lead with
// values over the left half of the panel's window only (its window
// narrows with the box), and undo gives the reading back exactly.
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
	valued := func() int {
		s := m.Record().Lead(p.Lead)
		n := 0
		for _, v := range s.MV {
			if !math.IsNaN(v) {
				n++
			}
		}
		return n
	}
	before := valued()
	box := p.Box
	box[2] = (box[0] + box[2]) / 2
	if err := m.MoveBox(i, box); err != nil {
		t.Fatal(err)
	}
	after := valued()
	// Half the panel's window at the record's rate is lost (give or take
	// the trace's own ends).
	half := int((p.T1S - p.T0S) / 2 * m.Record().Lead(p.Lead).RateHz)
	if before-after < half*8/10 {
		t.Fatalf("lead %s: samples with a value %d -> %d, want about %d fewer", p.Lead, before, after, half)
	}
	m.Undo()
	if valued() != before {
		t.Fatalf("undo: %d samples with a value, want %d", valued(), before)
	}
}
