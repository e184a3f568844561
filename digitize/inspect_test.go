package digitize

import (
	"bytes"
	"context"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"

	"tracelift/calib"
	"tracelift/record"
	"tracelift/record/csvio"
	"tracelift/record/wfdb"
	"tracelift/samples"
)

// benchPrintout renders case i of the CLI bench's suite for a seed the
// same way the bench does (same draws in the same order), so a case the
// bench scores badly can be looked at here.
func benchPrintout(t testing.TB, seed int64, i int) (*samples.Printout, string, []byte) {
	t.Helper()
	real, err := wfdb.ReadRecord("../../shared/data/ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	conds := samples.Conditions
	if v := os.Getenv("TRACELIFT_CASE_CONDITIONS"); v != "" {
		conds = strings.Split(v, ",")
	}
	sc := samples.NewSuiteCase(seed, i, conds, real)
	if v, err := strconv.ParseFloat(os.Getenv("TRACELIFT_CASE_DPI"), 64); err == nil && v > 0 {
		sc.Style.DPI = v
	}
	t.Logf("case %d: pen %.2f mm (half width %.2f px at %.0f dpi)", i, sc.Style.TraceWidthMM, sc.Style.TraceWidthMM*sc.Style.DPI/25.4/2, sc.Style.DPI)
	po, err := sc.Printout()
	if err != nil {
		t.Fatal(err)
	}
	name, data, err := sc.File(po)
	if err != nil {
		t.Fatal(err)
	}
	return po, name, data
}

// TestInspectBenchCase runs one bench case end to end and writes the
// rectified page, both ink maps, the working map and the traces to /tmp.
//
//	TRACELIFT_CASE=7 TRACELIFT_CASE_SEED=1 go test -run TestInspectBenchCase -v ./digitize
//
// TRACELIFT_CASE_CONDITIONS and TRACELIFT_CASE_DPI stand for the bench's
// --conditions and --dpi.
func TestInspectBenchCase(t *testing.T) {
	v := os.Getenv("TRACELIFT_CASE")
	if v == "" {
		t.Skip("set TRACELIFT_CASE=N (and TRACELIFT_CASE_SEED) to look at one bench case")
	}
	seed := int64(1)
	if s := os.Getenv("TRACELIFT_CASE_SEED"); s != "" {
		seed, _ = strconv.ParseInt(s, 10, 64)
	}
	for _, f := range strings.Split(v, ",") {
		i, _ := strconv.Atoi(f)
		inspectOne(t, seed, i)
	}
}

func inspectOne(t *testing.T, seed int64, i int) {
	po, name, data := benchPrintout(t, seed, i)
	pg, err := calib.Decode(data, name, calib.LoadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	cal, err := calib.Detect(context.Background(), pg, calib.Options{})
	if err != nil {
		t.Logf("case %d: calib: %v", i, err)
		return
	}
	tr := po.Truth
	t.Logf("case %d: truth px/mm %.3f/%.3f rot %.2f gain %.1f speed %.0f; calib px/mm %.3f (%.3f/%.3f) rot %.2f turned %d gain %.1f speed %.0f src %s conf %.2f warn %v",
		i, tr.PxPerMMX, tr.PxPerMMY, tr.RotationDeg, tr.GainMMPerMV, tr.SpeedMMPerS,
		cal.PxPerMM, cal.PxPerMMX, cal.PxPerMMY, cal.RotationDeg, cal.Turned, cal.GainMMPerMV, cal.SpeedMMPerS, cal.Source, cal.Confidence, cal.Warnings)
	pre := fmt.Sprintf("/tmp/dz/c%d_%d", seed, i)
	writePNG(t, pre+"_rect.png", cal.Rectified)
	if cal.Ink != nil {
		writePNG(t, pre+"_ink.png", cal.Ink)
	}
	own := InkFromRGB(cal.Rectified)
	writePNG(t, pre+"_own.png", own)
	{
		in := cal.Ink
		if in == nil {
			in = own
		}
		g := prepare(in, cal.PxPerMM)
		wm := image.NewGray(image.Rect(0, 0, g.w, g.h))
		copy(wm.Pix, g.pix)
		writePNG(t, pre+"_work.png", wm)
	}
	res, err := Run(context.Background(), cal, Options{})
	if err != nil {
		t.Logf("case %d: digitize: %v", i, err)
		return
	}
	acc := scoreLeads(tr.Signals, res.Record)
	var per []string
	for _, l := range tr.Signals.Leads() {
		per = append(per, fmt.Sprintf("%s %.1f", l, acc[l].SNRdB))
	}
	t.Logf("case %d: layout %s (truth %s) cabrera %v median %.1f [%s]", i, res.Layout, po.Truth.Layout, res.Cabrera, medianSNR(acc), strings.Join(per, ", "))
	for _, l := range tr.Signals.Leads() {
		a := acc[l]
		ref, e := tr.Signals.Lead(l), res.Record.Lead(l)
		if e == nil {
			continue
		}
		// Least-squares gain of the estimate against the truth, to tell a
		// scale error from a shape error.
		var sre, see float64
		for k := range ref.MV {
			tt := ref.StartS + float64(k)/ref.RateHz
			j := int(math.Round((tt - e.StartS) * e.RateHz))
			if j >= 0 && j < len(e.MV) && !math.IsNaN(e.MV[j]) {
				sre += ref.MV[k] * e.MV[j]
				see += e.MV[j] * e.MV[j]
			}
		}
		sh, shr := wideShift(ref, e)
		t.Logf("  %-4s snr %5.1f r %.3f ls-gain %.3f start %.3f/%.3f best shift %+.0f ms (r %.3f)", l, a.SNRdB, a.R, sre/see, ref.StartS, e.StartS, 1000*sh, shr)
	}
	// Where the truth's panels landed on the rectified page.
	if inv, ok := samples.Invert(cal.RectToImage); ok {
		for _, tp := range tr.Panels {
			ix, iy := samples.Apply(tr.PageToImage, tp.Box[0], tp.BaselineYPx)
			rx, ry := samples.Apply(inv, ix, iy)
			ix, iy = samples.Apply(tr.PageToImage, tp.Box[2], tp.BaselineYPx)
			rx1, ry1 := samples.Apply(inv, ix, iy)
			t.Logf("  truth %-4s row %d col %d x %.1f-%.1f base %.1f-%.1f t %.2f-%.2f", tp.Lead, tp.Row, tp.Col, rx, rx1, ry, ry1, tp.T0S, tp.T1S)
		}
	}
	for _, p := range res.Panels {
		t.Logf("  panel %-4s row %d col %d box %.1f,%.0f-%.1f,%.0f base %.1f t %.2f-%.2f", p.Lead, p.Row, p.Col, p.Box[0], p.Box[1], p.Box[2], p.Box[3], p.BaselineY, p.T0S, p.T1S)
	}
	// Traces over the rectified page in red.
	b := cal.Rectified.Bounds()
	ov := image.NewNRGBA(b)
	copy(ov.Pix, cal.Rectified.Pix)
	for _, trc := range res.Traces {
		for k, y := range trc.Y {
			if math.IsNaN(y) {
				continue
			}
			x, yy := trc.X0+k, int(y)
			if x >= 0 && x < b.Dx() && yy >= 0 && yy < b.Dy() {
				ov.SetNRGBA(x, yy, color.NRGBA{255, 0, 0, 255})
			}
		}
	}
	writePNG(t, pre+"_trace.png", ov)
	plotLeads(t, pre+"_plot.png", tr.Signals, res.Record)
	if err := csvio.WriteFile(pre+"_truth.csv", tr.Signals, 500); err != nil {
		t.Log(err)
	}
	if err := csvio.WriteFile(pre+"_est.csv", res.Record, 500); err != nil {
		t.Log(err)
	}
}

// plotLeads draws truth (blue) and estimate (red) per lead, 10 s across
// 2000 px, 100 px per mV, one 240 px strip per lead.
func plotLeads(t *testing.T, path string, truth, est *record.Record) {
	leads := truth.Leads()
	img := image.NewNRGBA(image.Rect(0, 0, 2000, 240*len(leads)))
	for i := range img.Pix {
		img.Pix[i] = 255
	}
	draw := func(s *record.Signal, row int, c color.NRGBA) {
		mean, n := 0.0, 0.0
		for _, v := range s.MV {
			if !math.IsNaN(v) {
				mean += v
				n++
			}
		}
		if n == 0 {
			return
		}
		mean /= n
		for k, v := range s.MV {
			if math.IsNaN(v) {
				continue
			}
			x := int((s.StartS + float64(k)/s.RateHz) * 200)
			y := row*240 + 120 - int((v-mean)*100)
			if x >= 0 && x < 2000 && y >= row*240 && y < row*240+240 {
				img.SetNRGBA(x, y, c)
			}
		}
	}
	for i, l := range leads {
		draw(truth.Lead(l), i, color.NRGBA{0, 0, 255, 255})
		if e := est.Lead(l); e != nil {
			draw(e, i, color.NRGBA{255, 0, 0, 255})
		}
	}
	writePNG(t, path, img)
}

func writePNG(t *testing.T, path string, img image.Image) {
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

// wideShift finds the shift of est against ref within ±300 ms (1 ms
// steps) that maximises their correlation: est(t+shift) ≈ ref(t).
func wideShift(ref, est *record.Signal) (shift, r float64) {
	best, bestR := 0.0, math.Inf(-1)
	for k := -300; k <= 300; k++ {
		sh := float64(k) / 1000
		var sa, sb, saa, sbb, sab, n float64
		for i, rv := range ref.MV {
			tt := ref.StartS + float64(i)/ref.RateHz + sh
			j := int(math.Round((tt - est.StartS) * est.RateHz))
			if j < 0 || j >= len(est.MV) || math.IsNaN(est.MV[j]) || math.IsNaN(rv) {
				continue
			}
			ev := est.MV[j]
			sa += rv
			sb += ev
			saa += rv * rv
			sbb += ev * ev
			sab += rv * ev
			n++
		}
		if n < 50 {
			continue
		}
		va, vb := saa-sa*sa/n, sbb-sb*sb/n
		if va <= 0 || vb <= 0 {
			continue
		}
		if c := (sab - sa*sb/n) / math.Sqrt(va*vb); c > bestR {
			best, bestR = sh, c
		}
	}
	return best, bestR
}

// TestInspectDemo digitizes the embedded demo printout whose name holds
// TRACELIFT_DEMO and logs per-lead SNR and the best wide shift, and
// plots truth against traces to /tmp/dz/demo_plot.png.
//
//	TRACELIFT_DEMO=clean go test -run TestInspectDemo -v ./digitize
func TestInspectDemo(t *testing.T) {
	want := os.Getenv("TRACELIFT_DEMO")
	if want == "" {
		t.Skip("set TRACELIFT_DEMO to part of a demo's name")
	}
	for _, d := range samples.Demo() {
		if !strings.Contains(d.Name, want) {
			continue
		}
		pg, err := calib.Decode(d.Data, d.Name, calib.LoadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		cal, err := calib.Detect(context.Background(), pg, calib.Options{})
		if err != nil {
			t.Fatal(err)
		}
		if os.Getenv("TRACELIFT_OWN_INK") != "" {
			cal.Ink = nil // digitize's own ink map instead of calib's
		}
		res, err := Run(context.Background(), cal, Options{})
		if err != nil {
			t.Fatal(err)
		}
		truth, err := d.TruthRecord()
		if err != nil {
			t.Fatal(err)
		}
		acc := scoreLeads(truth, res.Record)
		t.Logf("%s: layout %s px/mm %.3f median %.1f warn %v", d.Name, res.Layout, cal.PxPerMM, medianSNR(acc), cal.Warnings)
		for _, l := range truth.Leads() {
			if e := res.Record.Lead(l); e != nil {
				sh, r := wideShift(truth.Lead(l), e)
				t.Logf("  %-4s snr %5.1f best shift %+.0f ms (r %.4f)", l, acc[l].SNRdB, 1000*sh, r)
			}
		}
		for _, p := range res.Panels {
			t.Logf("  panel %-4s row %d col %d box %.1f,%.0f-%.1f,%.0f base %.1f t %.3f-%.3f", p.Lead, p.Row, p.Col, p.Box[0], p.Box[1], p.Box[2], p.Box[3], p.BaselineY, p.T0S, p.T1S)
		}
		os.MkdirAll("/tmp/dz", 0o755)
		plotLeads(t, "/tmp/dz/demo_plot.png", truth, res.Record)
		b := cal.Rectified.Bounds()
		ov := image.NewNRGBA(b)
		copy(ov.Pix, cal.Rectified.Pix)
		for _, trc := range res.Traces {
			for k, y := range trc.Y {
				if x, yy := trc.X0+k, int(y); !math.IsNaN(y) && x >= 0 && x < b.Dx() && yy >= 0 && yy < b.Dy() {
					ov.SetNRGBA(x, yy, color.NRGBA{0, 160, 255, 255})
				}
			}
		}
		writePNG(t, "/tmp/dz/demo_trace.png", ov)
	}
}
