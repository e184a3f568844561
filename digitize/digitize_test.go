package digitize

import (
	"math"
	"testing"

	"tracelift/samples"
)

// A clean 300-dpi 3x4+1 printout of a synthetic record, digitized and
// compared with what was drawn (the renderer's truth signals).
func TestClean3x4R1(t *testing.T) {
	p := render(t, dipoleRecord(1), samples.DefaultStyle())
	res := runOn(t, truthCal(p), Options{})
	if res.Layout != "3x4+1" || res.Cabrera {
		t.Fatalf("layout %s cabrera %v, want 3x4+1 standard", res.Layout, res.Cabrera)
	}
	acc := scoreLeads(p.Truth.Signals, res.Record)
	for l, a := range acc {
		t.Logf("%-4s SNR %6.1f dB  r %.4f  shift %+.3f s  cov %.3f", l, a.SNRdB, a.R, a.ShiftS, a.Coverage)
		if math.IsInf(a.SNRdB, -1) {
			t.Errorf("lead %s missing", l)
		}
	}
	if m := medianSNR(acc); m < 25 {
		t.Errorf("median SNR %.1f dB, want ≥ 25 (issue's goal for clean 300-dpi pages)", m)
	}
}

// Layouts and lead orders are found from the page alone; every lead the
// renderer drew comes back (its truth lists them) at a useful SNR.
func TestLayouts(t *testing.T) {
	cases := []struct {
		name    string
		layout  samples.Layout
		cabrera bool
		minMed  float64
	}{
		{"3x4+1 cabrera", samples.Layout3x4R1, true, 25},
		{"6x2", samples.Layout6x2, false, 25},
		{"6x2 cabrera", samples.Layout6x2, true, 25},
		{"3x4+3", samples.Layout3x4R3, false, 25},
		{"12x1", samples.Layout12x1, false, 20},
	}
	for i, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if testing.Short() && i > 1 {
				t.Skip("short")
			}
			st := samples.DefaultStyle()
			st.Layout, st.Cabrera, st.RhythmLeads = c.layout, c.cabrera, nil
			p := render(t, dipoleRecord(int64(10+i)), st)
			res := runOn(t, truthCal(p), Options{})
			if res.Layout != string(c.layout) || res.Cabrera != c.cabrera {
				t.Fatalf("found %s cabrera=%v, want %s cabrera=%v", res.Layout, res.Cabrera, c.layout, c.cabrera)
			}
			acc := scoreLeads(p.Truth.Signals, res.Record)
			for l, a := range acc {
				if math.IsInf(a.SNRdB, -1) {
					t.Errorf("lead %s missing", l)
				}
			}
			if m := medianSNR(acc); m < c.minMed {
				t.Errorf("median SNR %.1f dB, want ≥ %.0f", m, c.minMed)
			} else {
				t.Logf("median SNR %.1f dB", m)
			}
		})
	}
}

// Einthoven's law and Goldberger's relations hold exactly for the drawn
// signals (the renderer's source obeys them sample by sample), so on a
// clean page their residuals measure the digitization. Replacing one limb
// lead's trace with another lead's must blow its law up and get it named.
func TestLeadLaws(t *testing.T) {
	st := samples.DefaultStyle()
	st.Layout, st.RhythmLeads = samples.Layout6x2, nil
	p := render(t, dipoleRecord(3), st)
	cal := truthCal(p)
	res := runOn(t, cal, Options{})
	if len(res.Laws) == 0 {
		t.Fatal("no law checks on a 6x2 page")
	}
	lc := res.Laws[0]
	t.Logf("clean: Einthoven %.1f µV, Goldberger %.1f %.1f %.1f µV", lc.EinthovenRMSuV, lc.GoldbergerRMSuV[0], lc.GoldbergerRMSuV[1], lc.GoldbergerRMSuV[2])
	// 40 µV is under half of a 0.1 mV small box (common practice: 1 mm = 0.1 mV at 10 mm/mV).
	if lc.EinthovenRMSuV < 0 || lc.EinthovenRMSuV > 40 {
		t.Errorf("clean Einthoven residual %.1f µV, want 0..40", lc.EinthovenRMSuV)
	}
	for g, v := range lc.GoldbergerRMSuV {
		if v < 0 || v > 40 {
			t.Errorf("clean Goldberger residual %d = %.1f µV, want 0..40", g, v)
		}
	}
	// Swap III's trace for V2's (another row, the other column).
	var iii, v2 = -1, -1
	for i, tr := range res.Traces {
		switch tr.Lead {
		case "III":
			iii = i
		case "V2":
			v2 = i
		}
	}
	if iii < 0 || v2 < 0 {
		t.Fatal("III or V2 not traced")
	}
	traces := append([]Trace(nil), res.Traces...)
	src := res.Traces[v2]
	dst := traces[iii]
	pv, pd := res.Panels[v2], res.Panels[iii]
	dst.Y = make([]float64, len(src.Y))
	for k, y := range src.Y {
		dst.Y[k] = y - pv.BaselineY + pd.BaselineY
	}
	traces[iii] = dst
	rec := Signals(cal, res.Panels, traces, 500)
	laws, _ := lawChecks(rec, windowsOf(res.Panels), leadConfidence(res.Panels, traces))
	bad := laws[0]
	t.Logf("swapped: Einthoven %.1f µV, Goldberger %.1f %.1f %.1f µV, worst %s", bad.EinthovenRMSuV, bad.GoldbergerRMSuV[0], bad.GoldbergerRMSuV[1], bad.GoldbergerRMSuV[2], bad.Worst)
	if bad.EinthovenRMSuV < 100 {
		t.Errorf("swapped Einthoven residual %.1f µV, want ≥ 100", bad.EinthovenRMSuV)
	}
	if bad.Worst != "III" {
		t.Errorf("worst lead %q, want III", bad.Worst)
	}
	// The reconciled record is separate and the raw one is untouched.
	if res.Reconciled == nil || res.Reconciled == res.Record {
		t.Fatal("no separate reconciled record")
	}
	rawI, recI := res.Record.Lead("I"), res.Reconciled.Lead("I")
	same := true
	for k := range rawI.MV {
		if rawI.MV[k] != recI.MV[k] && !(math.IsNaN(rawI.MV[k]) && math.IsNaN(recI.MV[k])) {
			same = false
			break
		}
	}
	if same {
		t.Error("reconciled lead I equals the raw trace exactly; reconciliation did nothing")
	}
}

// A line of header text found as a row beside a lone strip makes two
// rows, which no layout draws: the text, broken between its letters and
// words, goes and the trace, inked in every column, stays.
func TestDropTextRows(t *testing.T) {
	const w, h = 1000, 400
	g := &gray{w: w, h: h, pix: make([]uint8, w*h)}
	for x := 100; x < 600; x++ { // text: 6 px glyphs, 3 px apart, a word gap every 40 px
		if x%9 < 6 && x%40 < 34 {
			for y := 50; y < 58; y++ {
				g.pix[y*w+x] = 255
			}
		}
	}
	for x := 50; x < 950; x++ { // the trace
		y := 250 + int(20*math.Sin(float64(x)/15))
		g.pix[y*w+x] = 255
	}
	rows := []rowInfo{{base: 54, x0: 100, x1: 600}, {base: 250, x0: 50, x1: 950}}
	got := dropTextRows(g, rows, 150)
	if len(got) != 1 || got[0].base != 250 {
		t.Fatalf("rows kept %+v, want the trace's alone", got)
	}
	// Rows that fit a layout are left alone.
	if got := dropTextRows(g, rows[1:], 150); len(got) != 1 {
		t.Fatalf("a lone trace row dropped")
	}
}

// A nearly flat lead on a fax breaks up under the dither, and its row
// is dropped for its broken ink: eleven rows fit no layout. The dropped
// candidate one row spacing below the last row is put back (twelve
// rows, 12x1); one at another distance (a header line) is not.
func TestAddFaintRows(t *testing.T) {
	var rows []rowInfo
	for i := 0; i < 11; i++ {
		rows = append(rows, rowInfo{base: 200.5 + 100*float64(i), x0: 90 + i%2, x1: 2140})
	}
	got := addFaintRows(rows, []int{120, 1300})
	if len(got) != 12 || got[11].base != 1300.5 || got[11].x0 != 90 || got[11].x1 != 2140 {
		t.Fatalf("rows %+v", got)
	}
	if got := addFaintRows(rows, []int{120}); len(got) != 11 {
		t.Fatalf("a header line put back: %d rows", len(got))
	}
}
