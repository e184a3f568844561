package model

import (
	"bytes"
	"context"
	"errors"
	"image"
	"math"
	"os"
	"path/filepath"
	"testing"
	"time"

	"tracelift/record"
	"tracelift/record/wfdb"
)

const sharedData = "../../../shared/data/"

// fakeBackend stands in for the pipeline: its "reading" is the first 10 s
// of the PTB record s0010_re (PTB Diagnostic ECG Database, PhysioNet; see
// ../shared/data/README.md) laid out as a 3×4 printout at 10 px/mm,
// 25 mm/s, 10 mm/mV, and its "measurements" are simple sums that any edit
// moves.
type fakeBackend struct {
	raw       *record.Record
	resignals int
	analyses  int
}

var layout3x4 = [3][4]string{
	{"I", "aVR", "V1", "V4"},
	{"II", "aVL", "V2", "V5"},
	{"III", "aVF", "V3", "V6"},
}

func newFake(t testing.TB) *fakeBackend {
	t.Helper()
	rec, err := wfdb.ReadRecord(sharedData + "ptb-s0010_re/s0010_re.hea")
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

func (f *fakeBackend) panels() []Panel {
	var ps []Panel
	for r := range 3 {
		for c := range 4 {
			x0, y0 := 50+float64(c)*625, 50+float64(r)*300
			ps = append(ps, Panel{Lead: layout3x4[r][c], Row: r, Col: c,
				Box: [4]float64{x0, y0, x0 + 625, y0 + 300}, BaselineY: y0 + 150,
				T0S: float64(c) * 2.5, T1S: float64(c+1) * 2.5})
		}
	}
	return ps
}

func (f *fakeBackend) Analyze(ctx context.Context, src Source, s Settings, p Progress) (*Analysis, error) {
	f.analyses++
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	p("reading", 0.5)
	q := map[string]float64{}
	for _, l := range record.Standard12 {
		q[l] = 0.9
	}
	q["V1"] = 0.4
	gain := 10.0
	if s.GainMMPerMV > 0 {
		gain = s.GainMMPerMV
	}
	return &Analysis{Name: src.Name, ImageSHA256: "ab" + string(bytes.Repeat([]byte("0"), 62)),
		Image: image.NewGray(image.Rect(0, 0, 2600, 1000)), PxPerMM: 10, ImagePxPerMM: 5,
		GainMMPerMV: gain, SpeedMMPerS: 25, Layout: "3x4", Panels: f.panels(), Quality: q,
		Raw: f.raw.Clone()}, nil
}

// Resignal mimics the digitizer: a panel's box moved right by dx shows
// its lead dx px later, so the lead's samples move dx/250 s earlier.
func (f *fakeBackend) Resignal(a *Analysis, ps []Panel) (*record.Record, []Panel, error) {
	f.resignals++
	rec := a.Raw.Clone()
	orig := f.panels()
	at := map[string]Panel{}
	for _, p := range orig {
		at[p.Lead] = p
	}
	ps = append([]Panel(nil), ps...)
	for i, p := range ps {
		if p.Drawn { // traced as the record's own lead, timed from the page's left edge (x 50)
			if rec.Lead(p.Lead) == nil && f.raw.Lead(p.Lead) != nil {
				rec.Signals = append(rec.Signals, *f.raw.Clone().Lead(p.Lead))
			}
			ps[i].T0S, ps[i].T1S = (p.Box[0]-50)/250, (p.Box[2]-50)/250
			continue
		}
		dx := p.Box[0] - at[p.Lead].Box[0]
		n := int(math.Round(dx / 250 * 500))
		s := rec.Lead(p.Lead)
		mv := make([]float64, len(s.MV))
		for k := range mv {
			j := k + n
			if j >= 0 && j < len(mv) {
				mv[k] = a.Raw.Lead(p.Lead).MV[j]
			} else {
				mv[k] = math.NaN()
			}
		}
		s.MV = mv
	}
	return rec, ps, nil
}

func (f *fakeBackend) Measure(rec *record.Record, q map[string]float64) (*Summary, error) {
	s := &Summary{Caution: Caution}
	gaps := 0
	for i := range rec.Signals {
		for _, v := range rec.Signals[i].MV {
			if math.IsNaN(v) {
				gaps++
			}
		}
	}
	s.Values = append(s.Values, Value{Key: "gaps", Label: "samples missing", V: float64(gaps), SD: math.NaN()})
	for _, l := range rec.Leads() {
		sum, n := 0.0, 0
		for _, v := range rec.Lead(l).MV {
			if !math.IsNaN(v) {
				sum += v
				n++
			}
		}
		s.Values = append(s.Values, Value{Key: "mean_" + l, Label: "mean " + l, Unit: "µV", V: 1000 * sum / float64(n), SD: math.NaN()})
	}
	return s, nil
}

func (f *fakeBackend) Export(a *Analysis, job ExportJob) ([]string, error) {
	return nil, errors.New("fake: no export")
}

func open(t testing.TB, f *fakeBackend, projectPath string) *Model {
	t.Helper()
	m := New(f)
	m.Now = func() time.Time { return time.Date(2026, 1, 2, 3, 4, 5, 0, time.UTC) }
	src := Source{Name: "test", Data: []byte{1}}
	a, err := Load(context.Background(), f, src, Settings{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := m.Install(src, a, Settings{}, nil, projectPath); err != nil {
		t.Fatal(err)
	}
	return m
}

func sameRecord(a, b *record.Record) bool {
	if len(a.Signals) != len(b.Signals) {
		return false
	}
	for i := range a.Signals {
		sa, sb := &a.Signals[i], &b.Signals[i]
		if sa.Lead != sb.Lead || len(sa.MV) != len(sb.MV) || sa.StartS != sb.StartS {
			return false
		}
		for k := range sa.MV {
			if math.Float64bits(sa.MV[k]) != math.Float64bits(sb.MV[k]) {
				return false
			}
		}
	}
	return true
}

func sameSummary(a, b *Summary) bool {
	if len(a.Values) != len(b.Values) {
		return false
	}
	for i := range a.Values {
		if a.Values[i].Key != b.Values[i].Key || math.Float64bits(a.Values[i].V) != math.Float64bits(b.Values[i].V) {
			return false
		}
	}
	return true
}

func TestEditsChangeRecordAndUndoIsExact(t *testing.T) {
	f := newFake(t)
	m := open(t, f, "")
	rec0, sum0 := m.Record().Clone(), m.Summary()
	ii := 4 // panel of lead II (row 1, col 0)
	if m.Panels()[ii].Lead != "II" {
		t.Fatalf("panel %d is %s", ii, m.Panels()[ii].Lead)
	}
	edits := []struct {
		name string
		do   func() error
	}{
		// 100 px down at 100 px/mV = −1 mV over columns 100..200 of the panel.
		{"shift", func() error { return m.ShiftStretch(ii, 150, 250, 100) }},
		{"erase", func() error { return m.Erase(ii, 400, 450) }},
		{"redraw", func() error { return m.Redraw(ii, [][2]float64{{300, 200}, {350, 250}, {320, 220}}) }},
		{"baseline", func() error { return m.MoveBaseline(ii, -20) }},
		{"assign", func() error { return m.Assign(ii, "III") }},
		{"box", func() error { return m.MoveBox(0, [4]float64{100, 50, 725, 350}) }},
	}
	var states []*record.Record
	var sums []*Summary
	for _, e := range edits {
		before := m.Record().Clone()
		if err := e.do(); err != nil {
			t.Fatalf("%s: %v", e.name, err)
		}
		if sameRecord(before, m.Record()) {
			t.Fatalf("%s did not change the record", e.name)
		}
		if len(m.Changes()) == 0 {
			t.Fatalf("%s: no change in the findings reported", e.name)
		}
		states = append(states, m.Record().Clone())
		sums = append(sums, m.Summary())
	}
	// The shift: lead II at t = (150+0.5−50)/250 s … is 1 mV lower than raw.
	k := int(math.Round((150.5 - 50 + 50) / 250 * 500)) // a sample inside the shifted stretch
	if d := states[0].Lead("II").MV[k] - rec0.Lead("II").MV[k]; math.Abs(d+1) > 1e-12 {
		t.Fatalf("shift moved II by %v mV, want -1", d)
	}
	// After the swap the panel says III and the signals swapped names.
	if m.Panels()[ii].Lead != "III" || m.Panels()[8].Lead != "II" {
		t.Fatalf("panels after assign: %s %s", m.Panels()[ii].Lead, m.Panels()[8].Lead)
	}
	if f.resignals != 1 {
		t.Fatalf("%d re-derivations, want 1", f.resignals)
	}
	for n := len(edits) - 1; n >= 0; n-- {
		if !m.Undo() {
			t.Fatal("undo refused")
		}
		want, wantSum := rec0, sum0
		if n > 0 {
			want, wantSum = states[n-1], sums[n-1]
		}
		if !sameRecord(m.Record(), want) || !sameSummary(m.Summary(), wantSum) {
			t.Fatalf("undo to %d edits is not bit-exact", n)
		}
	}
	if m.Undo() {
		t.Fatal("undo past the start")
	}
	for n := range edits {
		if !m.Redo() {
			t.Fatal("redo refused")
		}
		if !sameRecord(m.Record(), states[n]) {
			t.Fatalf("redo to %d edits differs", n+1)
		}
	}
	// A new edit clears the redo list.
	m.Undo()
	if err := m.Erase(1, 700, 720); err != nil {
		t.Fatal(err)
	}
	if m.CanRedo() {
		t.Fatal("redo kept after a new edit")
	}
}

func TestEditRefusedLeavesStateAlone(t *testing.T) {
	m := open(t, newFake(t), "")
	before := m.Record().Clone()
	if err := m.Edit(record.Correction{Kind: record.CorrErase, Lead: "V7", StartS: 0, EndS: 1}); err == nil {
		t.Fatal("edit of a missing lead accepted")
	}
	if err := m.Erase(99, 0, 10); !errors.Is(err, ErrNoPanel) {
		t.Fatalf("erase of no panel: %v", err)
	}
	if m.CanUndo() || !sameRecord(before, m.Record()) {
		t.Fatal("a refused edit changed the state")
	}
}

func TestPixelMappingRoundTrips(t *testing.T) {
	m := open(t, newFake(t), "")
	for i := range m.Panels() {
		for _, x := range []float64{60, 300.25, 640} {
			if got := m.XAt(i, m.TimeAt(i, x)); math.Abs(got-x) > 1e-9 {
				t.Fatalf("panel %d: x %v -> %v", i, x, got)
			}
		}
		if got := m.YAt(i, m.MVAt(i, 123)); math.Abs(got-123) > 1e-9 {
			t.Fatalf("panel %d: y -> %v", i, got)
		}
	}
	// Two clicks 50 rectified px apart said to be 5 mm: 10 px/mm on the
	// rectified page, which is twice the original's scale here.
	px, err := m.ScaleFromClicks(100, 100, 150, 100, 5)
	if err != nil || math.Abs(px-5) > 1e-12 {
		t.Fatalf("scale %v %v", px, err)
	}
}

func TestProjectSavedAndReopenedToSameState(t *testing.T) {
	dir := t.TempDir()
	img := filepath.Join(dir, "scan.png")
	if err := os.WriteFile(img, []byte("not really a png"), 0o644); err != nil {
		t.Fatal(err)
	}
	f := newFake(t)
	proj := ProjectPath(img)
	m := open(t, f, proj)
	m.settings.GainMMPerMV = 10
	if err := m.ShiftStretch(2, 1400, 1600, -30); err != nil {
		t.Fatal(err)
	}
	if err := m.Assign(3, "V5"); err != nil {
		t.Fatal(err)
	}
	if err := m.MoveBox(7, [4]float64{1925 + 40, 350, 2550 + 40, 650}); err != nil {
		t.Fatal(err)
	}
	if m.SaveErr() != nil {
		t.Fatal(m.SaveErr())
	}
	p, err := ReadProjectFile(proj)
	if err != nil || p == nil {
		t.Fatalf("read back: %v", err)
	}
	if len(p.Corrections) != 3 || p.Version != ProjectVersion {
		t.Fatalf("project has %d corrections, version %d", len(p.Corrections), p.Version)
	}
	m2 := New(f)
	a, _ := Load(context.Background(), f, m.Source(), p.Settings, nil)
	if err := m2.Install(m.Source(), a, p.Settings, p.Corrections, proj); err != nil {
		t.Fatal(err)
	}
	if !sameRecord(m.Record(), m2.Record()) || !sameSummary(m.Summary(), m2.Summary()) {
		t.Fatal("reopened project differs")
	}
	for i := range m.Panels() {
		if m.Panels()[i] != m2.Panels()[i] && !(math.IsNaN(m.Panels()[i].Confidence)) {
			t.Fatalf("panel %d differs: %+v vs %+v", i, m.Panels()[i], m2.Panels()[i])
		}
	}
	// No temporary files left beside the project.
	ents, _ := os.ReadDir(dir)
	if len(ents) != 2 {
		var names []string
		for _, e := range ents {
			names = append(names, e.Name())
		}
		t.Fatalf("directory holds %v", names)
	}
}

func TestFindProjectHashCheck(t *testing.T) {
	dir := t.TempDir()
	img := filepath.Join(dir, "a.jpg")
	os.WriteFile(img, []byte("abc"), 0o644)
	// SHA-256("abc") from FIPS 180-2, appendix B.1.
	const abc = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
	f := FindProject(img)
	if f.SHA256 != abc || f.Project != nil || f.Err != nil {
		t.Fatalf("%+v", f)
	}
	other := &Project{Version: 1, ImageSHA256: "ab" + string(bytes.Repeat([]byte("0"), 62)),
		Corrections: []record.Correction{{Kind: record.CorrErase, Lead: "I", StartS: 1, EndS: 2}}}
	if err := SaveProjectFile(ProjectPath(img), other); err != nil {
		t.Fatal(err)
	}
	f = FindProject(img)
	if !f.Mismatch || f.Project == nil {
		t.Fatalf("mismatch not seen: %+v", f)
	}
	kept, err := SetAside(f.Path, time.Date(2026, 1, 2, 3, 4, 5, 0, time.UTC))
	if err != nil {
		t.Fatal(err)
	}
	if p, err := ReadProjectFile(kept); err != nil || len(p.Corrections) != 1 {
		t.Fatalf("set-aside project unreadable: %v", err)
	}
	if f = FindProject(img); f.Project != nil {
		t.Fatal("project still in place after SetAside")
	}
}

func TestReadProjectRejects(t *testing.T) {
	cases := map[string]string{
		"not json":      `{`,
		"no version":    `{"corrections":[]}`,
		"newer":         `{"version":2}`,
		"zero":          `{"version":0}`,
		"bad hash":      `{"version":1,"image_sha256":"xyz"}`,
		"bad kind":      `{"version":1,"corrections":[{"kind":"smear","lead":"I"}]}`,
		"empty stretch": `{"version":1,"corrections":[{"kind":"erase","lead":"I","start_s":2,"end_s":1}]}`,
		"neg gain":      `{"version":1,"settings":{"gain_mm_per_mv":-5}}`,
	}
	for name, in := range cases {
		t.Run(name, func(t *testing.T) {
			if _, err := ReadProject(bytes.NewReader([]byte(in))); err == nil {
				t.Fatal("accepted")
			}
		})
	}
	if _, err := ReadProject(bytes.NewReader([]byte(`{"version":2}`))); !errors.Is(err, ErrProjectVersion) {
		t.Fatalf("newer version error: %v", err)
	}
}

func FuzzProjectRead(f *testing.F) {
	f.Add([]byte(`{"version":1,"image_sha256":"","settings":{"px_per_mm":11.8},"corrections":[{"kind":"shift","lead":"II","start_s":1,"end_s":2,"offset_mv":0.1}]}`))
	f.Add([]byte(`{"version":1,"corrections":[{"kind":"redraw","lead":"V1","points":[{"t_s":1,"mv":0},{"t_s":1.2,"mv":1}]},{"kind":"box","lead":"I","box":[1,2,3,4]}]}`))
	f.Add([]byte(`{"version":1e400}`))
	f.Add([]byte(`null`))
	f.Fuzz(func(t *testing.T, b []byte) {
		p, err := ReadProject(bytes.NewReader(b))
		if err != nil {
			return
		}
		// What is read back writes and reads again to the same thing.
		var buf bytes.Buffer
		if err := WriteProject(&buf, p); err != nil {
			t.Fatal(err)
		}
		q, err := ReadProject(&buf)
		if err != nil {
			t.Fatalf("round trip: %v", err)
		}
		if len(q.Corrections) != len(p.Corrections) || q.Settings != p.Settings {
			t.Fatal("round trip changed the project")
		}
	})
}
