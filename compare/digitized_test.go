package compare

import (
	"context"
	"encoding/json"
	"math/rand"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"tracelift/calib"
	"tracelift/pipeline"
	"tracelift/record"
	"tracelift/samples"
)

// digitizeSide runs the whole pipeline on a picture and returns it as a
// comparison side.
func digitizeSide(t testing.TB, name string, data []byte) Side {
	t.Helper()
	pg, err := calib.Decode(data, name, calib.LoadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	o, err := pipeline.ProcessPage(context.Background(), pg, pipeline.Options{})
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	if o.Findings == nil {
		t.Fatalf("%s: not measured: %v", name, o.MeasureErr)
	}
	q := map[string]float64{}
	for l, lq := range o.Digitized.Quality {
		q[l] = lq.Confidence
	}
	return Side{Label: name, Record: o.Digitized.Record, Findings: o.Findings, Quality: q, Digitized: true}
}

// renderPNG draws rec with our renderer in style st under condition cond
// ("clean", "photo", "fax", ...) and encodes it as a file would arrive.
func renderPNG(t testing.TB, rec *record.Record, st samples.Style, cond string, seed int64) (string, []byte) {
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
	c := samples.SuiteCase{Condition: cond}
	name, data, err := c.File(po)
	if err != nil {
		t.Fatal(err)
	}
	return name, data
}

// outsideTruth reads the drawn signals of an outside printout's truth file
// (../shared/data/outside-printouts/README.md: per lead t0, t1 and mV at
// fs_hz).
func outsideTruth(t testing.TB, name string) *record.Record {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(shared, "outside-printouts", name+".json"))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		FsHz  float64 `json:"fs_hz"`
		Leads map[string]struct {
			T0 float64   `json:"t0"`
			MV []float64 `json:"mV"`
		} `json:"leads"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	rec := &record.Record{Name: name + " truth"}
	for _, l := range record.Standard12 {
		if s, ok := doc.Leads[l]; ok {
			rec.Signals = append(rec.Signals, record.Signal{Lead: l, RateHz: doc.FsHz, StartS: s.T0, MV: s.MV})
		}
	}
	return rec
}

func outsidePicture(t testing.TB, file string) Side {
	t.Helper()
	data, err := os.ReadFile(filepath.Join(shared, "outside-printouts", file))
	if err != nil {
		t.Fatal(err)
	}
	return digitizeSide(t, file, data)
}

// checkNothing fails when r raises a change or reports an exchange.
func checkNothing(t *testing.T, r *Result) {
	t.Helper()
	t.Logf("\n%s", table(r, testing.Verbose()))
	if k := raisedKeys(r); len(k) > 0 {
		t.Errorf("raised %v, want nothing", k)
	}
	if r.Exchange != nil {
		t.Errorf("exchange %s reported between two readings of one record", r.Exchange.Name)
	}
	beyond, n := 0, 0
	for _, c := range r.Changes {
		if c.Delta.OK() {
			n++
			if c.Beyond {
				beyond++
			}
		}
	}
	t.Logf("%d of %d items beyond their 90 %% uncertainty", beyond, n)
}

// Two pictures of one record (PTB s0010_re's first 10 s drawn by our
// renderer, a clean 3x4+1 scan at 300 dpi and a 6x2 phone photo at
// 200 dpi) are two digitizations of an unchanged heart: comparing them,
// or either with the record itself, raises nothing.
func TestSecondDigitizationRaisesNothing(t *testing.T) {
	rec := window(ptb(t), 0, 10).Window(record.Standard12, 500, 0, 10)
	nA, pA := renderPNG(t, rec, samples.Style{Layout: samples.Layout3x4R1, DPI: 300, Pulses: true, Labels: true}, "clean", 1)
	nB, pB := renderPNG(t, rec, samples.Style{Layout: samples.Layout6x2, DPI: 200, Pulses: true, Labels: true}, "photo", 2)
	a, b := digitizeSide(t, "3x4+1 clean "+nA, pA), digitizeSide(t, "6x2 photo "+nB, pB)
	file := Side{Label: "record", Record: rec}
	for _, tc := range []struct {
		name string
		a, b Side
	}{{"picture against picture", a, b}, {"record against clean scan", file, a}, {"record against photo", file, b}} {
		t.Run(tc.name, func(t *testing.T) {
			r, err := Compare(tc.a, tc.b, Options{})
			if err != nil {
				t.Fatal(err)
			}
			checkNothing(t, r)
		})
	}
}

// The outside printouts (../shared/data/outside-printouts, drawn by a
// renderer that is not ours): outside01 (clean scan) and outside06 (phone
// photo) are both PTB s0010_re, from 6.5 s and from 26 s; outside02 is a
// dipole model whose drawn signals ship in its truth file. Nothing is
// raised between two pictures of one record, nor between a picture and
// the signals it was drawn from.
func TestOutsidePrintoutsRaiseNothing(t *testing.T) {
	o1 := outsidePicture(t, "outside01.png")
	o6 := outsidePicture(t, "outside06.jpg")
	o2 := outsidePicture(t, "outside02.png")
	for _, tc := range []struct {
		name string
		a, b Side
	}{
		{"outside01 against outside06", o1, o6},
		{"outside01 truth against its picture", Side{Label: "truth", Record: outsideTruth(t, "outside01")}, o1},
		{"outside02 truth against its picture", Side{Label: "truth", Record: outsideTruth(t, "outside02")}, o2},
	} {
		t.Run(tc.name, func(t *testing.T) {
			r, err := Compare(tc.a, tc.b, Options{})
			if err != nil {
				t.Fatal(err)
			}
			checkNothing(t, r)
		})
	}
}

// A change injected before drawing survives digitization: PTB
// s0010_re's first 10 s and the same with the ST raised by 0.15 mV in V2
// and V3, both drawn as clean 3x4+1 scans at 300 dpi, digitized and
// compared, raise the two ST shifts and nothing else.
func TestInjectedSTThroughPictures(t *testing.T) {
	rec := window(ptb(t), 0, 10).Window(record.Standard12, 500, 0, 10)
	f := measure(t, rec)
	st := samples.Style{Layout: samples.Layout3x4R1, DPI: 300, Pulses: true, Labels: true}
	nA, pA := renderPNG(t, rec, st, "clean", 1)
	nB, pB := renderPNG(t, addST(rec, f, 0.15, "V2", "V3"), st, "clean", 1)
	r, err := Compare(digitizeSide(t, nA, pA), digitizeSide(t, nB, pB), Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("\n%s", table(r, testing.Verbose()))
	got := raisedKeys(r)
	want := []string{"V2 " + ItemST, "V3 " + ItemST}
	for _, w := range want {
		if !slices.Contains(got, w) {
			t.Errorf("%s not raised (raised %v)", w, got)
		}
	}
	for _, g := range got {
		if !slices.Contains(want, g) {
			t.Errorf("%s raised, not injected", g)
		}
	}
}

// Comparing two digitized pages costs under 100 ms beyond digitizing
// them (the goal), measured here on two pictures of PTB
// s0010_re: go test -bench Compare ./compare/.
func BenchmarkCompareDigitized(b *testing.B) {
	rec := window(ptb(b), 0, 10).Window(record.Standard12, 500, 0, 10)
	nA, pA := renderPNG(b, rec, samples.Style{Layout: samples.Layout3x4R1, DPI: 300, Pulses: true, Labels: true}, "clean", 1)
	nB, pB := renderPNG(b, rec, samples.Style{Layout: samples.Layout6x2, DPI: 200, Pulses: true, Labels: true}, "photo", 2)
	sa, sb := digitizeSide(b, nA, pA), digitizeSide(b, nB, pB)
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		if _, err := Compare(sa, sb, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// The fax outside05 (5 mm grid lines only, binarised, salt noise) is read
// in its layout since calib takes such grids out of the ink, at about
// 8 dB per lead, so several leads' beats are still rough. Against its
// truth file the comparison must not raise an axis shift. (It still raises amplitude
// changes in leads the digitizer is confident of; see the package's
// report.)
func TestOutsideFaxRaisesNoAxisShift(t *testing.T) {
	o5 := outsidePicture(t, "outside05.png")
	r, err := Compare(Side{Label: "truth", Record: outsideTruth(t, "outside05")}, o5, Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("\n%s", table(r, testing.Verbose()))
	for _, n := range r.Notes {
		if strings.Contains(n, "blurs") {
			t.Logf("said: %s", n)
		}
	}
	for _, c := range r.RaisedChanges() {
		if c.Item == ItemQRSAxis || c.Item == ItemTAxis || c.Item == ItemPAxis {
			t.Errorf("%s raised on blurred limb-lead beats", c.Message)
		}
	}
}
