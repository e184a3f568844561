package engine

import (
	"bytes"
	"context"
	"errors"
	"io"
	"math/rand"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"tracelift/axis"
	"tracelift/compare"
	"tracelift/gui/model"
	"tracelift/record"
	"tracelift/record/csvio"
	"tracelift/record/wfdb"
	"tracelift/samples"
	"tracelift/samples/dipole"
)

// ptbHea is the open PTB Diagnostic ECG Database record patient001/s0010_re
// (Bousseljot et al. 1995, PhysioNet; ../../../shared/data/README.md).
const ptbHea = "../../../shared/data/ptb-s0010_re/s0010_re.hea"

// demoOnScreen reads the demo printout as the app does (the backend's
// Analyze, then the model's Install, which measures it) and returns the
// tracing on screen.
func demoOnScreen(t *testing.T, b *Backend) model.Current {
	t.Helper()
	src, err := Demo()
	if err != nil {
		t.Fatal(err)
	}
	a, err := model.Load(context.Background(), b, src, model.Settings{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	m := model.New(b)
	if err := m.Install(src, a, model.Settings{}, nil, ""); err != nil {
		t.Fatal(err)
	}
	cur, ok := m.Current()
	if !ok {
		t.Fatalf("the demo is not measured: %v", m.MeasureErr())
	}
	return cur
}

// demoSignals is the record the demo printout was drawn from: its
// invented dipole (samples.DemoTruth.Params) generated again.
func demoSignals(t *testing.T) *record.Record {
	t.Helper()
	tr, err := samples.DefaultDemo().Truth()
	if err != nil {
		t.Fatal(err)
	}
	return dipole.Generate(tr.Params)
}

// renderFile draws rec with our renderer in style st under condition cond
// and writes it into dir as a file would arrive; it returns the path.
func renderFile(t *testing.T, dir, stem string, rec *record.Record, st samples.Style, cond string, seed int64) string {
	t.Helper()
	po, err := samples.Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	if cond != "clean" {
		po, err = samples.Degrade(po, samples.Condition(cond, rand.New(rand.NewSource(seed))))
		if err != nil {
			t.Fatal(err)
		}
	}
	name, data, err := samples.SuiteCase{Condition: cond}.File(po)
	if err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(dir, stem+filepath.Ext(name))
	if err := os.WriteFile(p, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// addST adds mv to the ST-T segment of every beat in the given leads:
// from the J point (QRS offset) up over 20 ms, held to the middle of the
// ST-T, then back to zero at the T end, the fiducials as the measurement
// engine finds them on rec.
func addST(t *testing.T, rec *record.Record, mv float64, leads ...string) *record.Record {
	t.Helper()
	f, err := axis.Measure(rec, axis.Options{})
	if err != nil {
		t.Fatal(err)
	}
	out := rec.Clone()
	fd := f.Fiducials
	for _, l := range leads {
		s := out.Lead(l)
		for _, b := range f.Beats {
			j := b.TS + float64(fd.QRSOff)/1000
			e := b.TS + float64(fd.TEnd)/1000
			mid := (j + e) / 2
			for k := range s.MV {
				tt := s.StartS + float64(k)/s.RateHz
				var v float64
				switch {
				case tt < j || tt >= e:
					continue
				case tt < j+0.020:
					v = mv * (tt - j) / 0.020
				case tt < mid:
					v = mv
				default:
					v = mv * (e - tt) / (e - mid)
				}
				s.MV[k] += v
			}
		}
	}
	return out
}

func raisedKeys(c *model.Comparison) []string {
	var out []string
	for _, ch := range c.Handle.(*compare.Result).RaisedChanges() {
		k := ch.Item
		if ch.Lead != "" {
			k = ch.Lead + " " + ch.Item
		}
		out = append(out, k)
	}
	return out
}

// The demo printout on screen (a clean 3x4+1 scan at 300 dpi of an
// invented signal) against a second digitization of the same signals from
// another rendering, written as a file and opened as the earlier tracing
// (a 3x4+1 page at 200 dpi degraded as a phone photo; a 6x2 page at
// 200 dpi): one unchanged heart read twice, so nothing is raised and no
// reversal is said; every lead's beats are overlaid, and a listed change
// says why it is not raised.
func TestCompareDemoWithSecondRendering(t *testing.T) {
	if testing.Short() {
		t.Skip("digitizes three pages")
	}
	b := &Backend{}
	cur := demoOnScreen(t, b)
	dir := t.TempDir()
	for _, tc := range []struct {
		name string
		st   samples.Style
		cond string
	}{
		{"3x4+1 photo", samples.Style{Layout: samples.Layout3x4R1, DPI: 200, Pulses: true, Labels: true}, "photo"},
		{"6x2 clean", samples.Style{Layout: samples.Layout6x2, DPI: 200, Pulses: true, Labels: true}, "clean"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			earlier := renderFile(t, dir, "earlier", demoSignals(t), tc.st, tc.cond, 2)
			c, err := b.CompareWith(context.Background(), model.Source{Path: earlier}, cur, nil)
			if err != nil {
				t.Fatal(err)
			}
			for _, l := range c.Listed {
				t.Logf("listed: %s [%s]", l.Text, l.Why)
			}
			if len(c.Raised) != 0 {
				t.Errorf("raised %v between two readings of one signal", raisedKeys(c))
			}
			if c.Reversal != "" {
				t.Errorf("reversal said between two readings of one signal: %s", c.Reversal)
			}
			if len(c.Beats) != 12 {
				t.Errorf("%d leads overlaid, want the 12 standard leads", len(c.Beats))
			}
			for _, l := range c.Listed {
				if l.Raised || !strings.HasPrefix(l.Why, "not raised: ") || l.Uncertainty == "" || l.Threshold == "" {
					t.Errorf("listed change without its reason, uncertainty or threshold: %+v", l)
				}
			}
			if !strings.HasPrefix(c.Caution, "A comparison of two digitized tracings is no diagnosis") ||
				!strings.Contains(c.Caution, "qualified clinician") {
				t.Errorf("caution %q", c.Caution)
			}
			if c.FileStem != "earlier-vs-"+strings.TrimSuffix(samples.DefaultDemo().Name, ".png") {
				t.Errorf("file stem %q", c.FileStem)
			}
		})
	}
}

// The same signals with the ST segment lowered by 0.15 mV in V2 and V3,
// drawn as the demo is drawn (its own style, clean) and opened as the
// earlier tracing: against the demo on screen the comparison raises
// exactly the two ST shifts, as elevations (the current ST is 0.15 mV
// above the earlier one; 0.1 mV is the threshold, Thygesen et al. 2018,
// from memory), each with its uncertainty and the threshold's source.
func TestCompareDemoWithInjectedST(t *testing.T) {
	if testing.Short() {
		t.Skip("digitizes two pages")
	}
	b := &Backend{}
	cur := demoOnScreen(t, b)
	tr, err := samples.DefaultDemo().Truth()
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	earlier := renderFile(t, dir, "before", addST(t, demoSignals(t), -0.15, "V2", "V3"), tr.Style, "clean", 1)
	c, err := b.CompareWith(context.Background(), model.Source{Path: earlier}, cur, nil)
	if err != nil {
		t.Fatal(err)
	}
	got := raisedKeys(c)
	want := []string{"V2 " + compare.ItemST, "V3 " + compare.ItemST}
	slices.Sort(got)
	if !slices.Equal(got, want) {
		t.Errorf("raised %v, want exactly %v", got, want)
	}
	for _, ch := range c.Handle.(*compare.Result).RaisedChanges() {
		if ch.Kind != compare.KindSTUp {
			t.Errorf("%s %s raised as %s, want %s", ch.Lead, ch.Item, ch.Kind, compare.KindSTUp)
		}
	}
	for _, l := range c.Raised {
		if !l.Raised || l.Why != "" || !strings.Contains(l.Uncertainty, "mV (90 %)") || !strings.Contains(l.Source, "Thygesen") {
			t.Errorf("raised line %+v lacks its uncertainty or source", l)
		}
	}
}

// ptbPair writes PTB s0010_re's 10 s from 10 s on as a CSV and returns the
// record's own header (the earlier tracing) and that window as the
// tracing on screen.
func ptbPair(t *testing.T) (string, model.Current) {
	t.Helper()
	rec, err := wfdb.ReadRecord(ptbHea)
	if err != nil {
		t.Fatal(err)
	}
	later := rec.Window(record.Standard12, 500, 10, 10)
	return ptbHea, model.Current{Name: "later.csv", Record: later}
}

// Printing the comparison of PTB s0010_re's record file against its own
// later 10 s writes report's one comparison page, which poppler's
// pdftotext reads back with the caution, as one page; a file already at
// the chosen name is left as it was and the page goes beside it.
func TestPrintComparisonKeepsFiles(t *testing.T) {
	hea, cur := ptbPair(t)
	b := &Backend{}
	c, err := b.CompareWith(context.Background(), model.Source{Path: hea}, cur, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Raised) != 0 {
		t.Errorf("raised %v within one record", raisedKeys(c))
	}
	dir := t.TempDir()
	mine := filepath.Join(dir, c.FileStem+".pdf")
	if err := os.WriteFile(mine, []byte("the user's own file"), 0o644); err != nil {
		t.Fatal(err)
	}
	got, err := b.PrintComparison(c, mine, "a4")
	if err != nil {
		t.Fatal(err)
	}
	if got != filepath.Join(dir, "s0010_re-vs-later-2.pdf") {
		t.Errorf("written to %s", got)
	}
	if kept, _ := os.ReadFile(mine); string(kept) != "the user's own file" {
		t.Errorf("the file already there was changed: %q", kept)
	}
	data, err := os.ReadFile(got)
	if err != nil || !bytes.HasPrefix(data, []byte("%PDF-")) {
		t.Fatalf("no PDF written (%v)", err)
	}
	// A second print takes the next name.
	if again, err := b.PrintComparison(c, mine, "letter"); err != nil || filepath.Base(again) != "s0010_re-vs-later-3.pdf" {
		t.Errorf("second print: %s, %v", again, err)
	}
	if _, err := b.PrintComparison(c, filepath.Join(dir, "x.pdf"), "a5"); err == nil {
		t.Error("paper a5 accepted")
	}
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Skip("pdftotext (poppler-utils) not installed")
	}
	out, err := exec.Command("pdftotext", "-layout", got, "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Join(strings.Fields(string(out)), " ")
	for _, w := range []string{"A comparison of two digitized tracings is no diagnosis", "qualified clinician", "CHANGES RAISED: 0", "s0010_re.hea"} {
		if !strings.Contains(text, w) {
			t.Errorf("the page lacks %q:\n%s", w, text)
		}
	}
	if n := strings.Count(string(out), "\f"); n != 1 {
		t.Errorf("%d pages, want 1", n)
	}
}

// The printed page is drawn by the writer the backend is given, not by one
// found through a side effect.
func TestPrintComparisonUsesGivenWriter(t *testing.T) {
	hea, cur := ptbPair(t)
	called := false
	b := &Backend{ComparePDF: func(w io.Writer, r *compare.Result, paper string) error {
		called = true
		_, err := w.Write([]byte("%PDF-given"))
		return err
	}}
	c, err := b.CompareWith(context.Background(), model.Source{Path: hea}, cur, nil)
	if err != nil {
		t.Fatal(err)
	}
	p, err := b.PrintComparison(c, filepath.Join(t.TempDir(), "c.pdf"), "")
	if err != nil || !called {
		t.Fatalf("%s, %v, writer called %v", p, err, called)
	}
	if data, _ := os.ReadFile(p); string(data) != "%PDF-given" {
		t.Errorf("wrote %q", data)
	}
	// A writer that fails leaves no file behind.
	b.ComparePDF = func(io.Writer, *compare.Result, string) error { return errors.New("disk full") }
	dir := t.TempDir()
	if _, err := b.PrintComparison(c, filepath.Join(dir, "c.pdf"), "a4"); err == nil {
		t.Error("a failing writer reported success")
	}
	if left, _ := os.ReadDir(dir); len(left) != 0 {
		t.Errorf("left %v behind", left)
	}
}

// An earlier tracing that cannot be read gives an error that names the
// file and says what to do, in the user's words; none panics.
func TestCompareBadEarlier(t *testing.T) {
	_, cur := ptbPair(t)
	dir := t.TempDir()
	write := func(name string, data []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, data, 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	demo := samples.DefaultDemo().Data
	var flat bytes.Buffer
	flatRec := &record.Record{Signals: []record.Signal{{Lead: "II", RateHz: 500, MV: make([]float64, 5000)}}}
	if err := csvio.Write(&flat, flatRec, 500); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name, path, says string
	}{
		{"missing", filepath.Join(dir, "gone.png"), "not there"},
		{"text file", write("notes.txt", []byte("hello")), "no time column"},
		{"word file", write("letter.docx", []byte("PK")), "not a tracing this program reads"},
		{"cut-short picture", write("cut.png", demo[:200]), "not a picture this program can open"},
		{"JSON without its CSV", write("lone.json", []byte(`{"file":"x.png","quality":{"II":{"confidence":1}}}`)), "lone.csv"},
		{"JSON that is not ours", write("other.json", []byte(`[1,2`)), "not a tracing this program reads"},
		{"CSV of nothing", write("empty.csv", []byte("")), "empty file"},
		{"flat line", write("flat.csv", flat.Bytes()), "No heartbeats could be measured"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := (&Backend{}).CompareWith(context.Background(), model.Source{Path: tc.path}, cur, nil)
			if err == nil {
				t.Fatal("compared")
			}
			msg := Explain(err).String()
			t.Logf("%s", msg)
			if !strings.Contains(strings.ToLower(msg), strings.ToLower(tc.says)) || !strings.Contains(msg, "The earlier tracing, "+filepath.Base(tc.path)+",") ||
				!strings.Contains(err.Error(), filepath.Base(tc.path)) {
				t.Errorf("message %q (error %q): want it to say %q and name %s", msg, err, tc.says, filepath.Base(tc.path))
			}
		})
	}
	if _, err := (&Backend{}).CompareWith(context.Background(), model.Source{Path: ptbHea}, model.Current{}, nil); err == nil {
		t.Error("compared with nothing on screen")
	}
}

// armsReversed returns rec as recorded with the left and right arm
// electrodes exchanged: I inverted, II and III exchanged, aVR and aVL
// exchanged, aVF unchanged (Einthoven's and Goldberger's definitions;
// the precordial leads, against the central terminal, are unchanged).
func armsReversed(rec *record.Record) *record.Record {
	out := rec.Clone()
	from := map[string]string{"I": "I", "II": "III", "III": "II", "aVR": "aVL", "aVL": "aVR"}
	for i := range out.Signals {
		s := &out.Signals[i]
		src, ok := from[s.Lead]
		if !ok {
			continue
		}
		orig := rec.Lead(src)
		for k := range s.MV {
			s.MV[k] = orig.MV[k]
			if s.Lead == "I" {
				s.MV[k] = -orig.MV[k]
			}
		}
	}
	return out
}

// The earlier tracing recorded with the arm electrodes reversed (PTB
// s0010_re's first 10 s, a CSV) against the same 10 s as they are: the
// window says a likely reversal, as a recording difference, and raises
// nothing once it is undone.
func TestCompareSaysLikelyReversal(t *testing.T) {
	rec, err := wfdb.ReadRecord(ptbHea)
	if err != nil {
		t.Fatal(err)
	}
	win := rec.Window(record.Standard12, 500, 0, 10)
	var buf bytes.Buffer
	if err := csvio.Write(&buf, armsReversed(win), 500); err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(t.TempDir(), "reversed.csv")
	if err := os.WriteFile(p, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	c, err := (&Backend{}).CompareWith(context.Background(), model.Source{Path: p}, model.Current{Name: "as-is", Record: win}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(c.Reversal, "Likely recording difference, not a change of the heart: ") || !strings.Contains(c.Reversal, "undone") {
		t.Errorf("reversal said as %q", c.Reversal)
	}
	if len(c.Raised) != 0 {
		t.Errorf("raised %v with the reversal undone", raisedKeys(c))
	}
}
