package samples

import (
	"image"
	"math"
	"math/rand"
	"sort"
	"testing"

	"tracelift/record"
	"tracelift/record/wfdb"
	"tracelift/samples/dipole"
)

// truthMV returns the truth signal of a panel at tracing time tau, by
// linear interpolation, with the panel's polarity.
func truthMV(tr Truth, pn Panel, tau float64) (float64, bool) {
	lead, sign := pn.Lead, 1.0
	if lead == "-aVR" {
		lead, sign = "aVR", -1
	}
	s := tr.Signals.Lead(lead)
	if s == nil {
		return 0, false
	}
	x := (tau - s.StartS) * s.RateHz
	i := int(math.Floor(x))
	if i < 0 || i+1 >= len(s.MV) {
		return 0, false
	}
	f := x - float64(i)
	return sign * (s.MV[i]*(1-f) + s.MV[i+1]*f), true
}

// inkCentroidY is the darkness-weighted mean y of column x within
// [yc-half, yc+half], darkness = 255 − green channel.
func inkCentroidY(img *image.NRGBA, x int, yc, half float64) (float64, float64) {
	var sw, swy float64
	for y := int(math.Floor(yc - half)); y <= int(math.Ceil(yc+half)); y++ {
		if y < 0 || y >= img.Rect.Dy() {
			continue
		}
		d := 255 - float64(img.Pix[img.PixOffset(x, y)+1])
		sw += d
		swy += d * (float64(y) + 0.5)
	}
	if sw == 0 {
		return math.NaN(), 0
	}
	return swy / sw, sw
}

func percentile(v []float64, p float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	return s[int(math.Min(float64(len(s)-1), p*float64(len(s))))]
}

// checkPixels asserts that, in every panel, where the trace is shallow,
// the ink centroid of each pixel column sits at
// BaselineYPx − mV·gain·PxPerMMY (median within 0.2 px, 95th percentile
// within 0.5 px).
func checkPixels(t *testing.T, p *Printout, st Style) {
	t.Helper()
	checkPixelsTol(t, p, st, 0.2, 0.5)
}

// checkPixelsTol is checkPixels with the median and 95th-percentile
// limits given (px).
func checkPixelsTol(t *testing.T, p *Printout, st Style, medLim, p95Lim float64) {
	t.Helper()
	tr := p.Truth
	pxPerS := tr.SpeedMMPerS * tr.PxPerMMX
	pxPerMV := tr.GainMMPerMV * tr.PxPerMMY
	hw := st.TraceWidthMM * tr.PxPerMMX / 2
	for _, pn := range tr.Panels {
		var errs []float64
		for x := int(pn.Box[0]) + 4; x < int(pn.Box[2])-4; x++ {
			xc := float64(x) + 0.5
			tau := pn.T0S + (xc-pn.Box[0])/pxPerS
			// Shallow: the truth moves less than a pixel over the
			// stroke's width around this column. The expected height is
			// the truth's mean across the column (a real record wiggles
			// within one column).
			_, ok := truthMV(tr, pn, tau)
			lo, hi := math.Inf(1), math.Inf(-1)
			span := 2*hw + 0.5
			for k := -8; k <= 8 && ok; k++ {
				v, ok1 := truthMV(tr, pn, tau+span*float64(k)/8/pxPerS)
				ok = ok1
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
			if !ok || (hi-lo)*pxPerMV > 1 {
				continue
			}
			var mv float64
			for k := -4; k <= 4; k++ {
				v, _ := truthMV(tr, pn, tau+float64(k)/9/pxPerS)
				mv += v / 9
			}
			want := pn.BaselineYPx - mv*pxPerMV
			got, w := inkCentroidY(p.Image, x, want, hw+4)
			if w == 0 {
				t.Fatalf("%s: no ink at x=%d near y=%.1f", pn.Lead, x, want)
			}
			errs = append(errs, math.Abs(got-want))
		}
		if len(errs) < 100 {
			t.Fatalf("%s: only %d shallow columns checked", pn.Lead, len(errs))
		}
		med, p95 := percentile(errs, 0.5), percentile(errs, 0.95)
		if testing.Verbose() && pn.Row == 0 && pn.Col == 0 {
			t.Logf("%s: median %.3f px, 95th %.3f px, %d columns", pn.Lead, med, p95, len(errs))
		}
		if med > medLim || p95 > p95Lim {
			t.Errorf("%s (row %d col %d): |centroid − truth| median %.3f px, 95th %.3f px over %d columns", pn.Lead, pn.Row, pn.Col, med, p95, len(errs))
		}
	}
}

func plainStyle() Style {
	st := DefaultStyle()
	st.Grid = GridNone
	st.Labels = false
	st.Header = ""
	st.Separators = false
	st.TraceWidthMM = 0.2
	return st
}

// The truth must describe the pixels, across layouts, scales and styles.
func TestTruthMatchesPixels(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 11, HeartRateBPM: 75, QRSAxisDeg: 30})
	cases := []struct {
		name string
		mod  func(*Style)
	}{
		{"3x4+1 300dpi", func(s *Style) {}},
		{"3x4+3 cabrera 200dpi", func(s *Style) { s.Layout = Layout3x4R3; s.Cabrera = true; s.DPI = 200 }},
		{"6x2 50mm/s 20mm/mV", func(s *Style) { s.Layout = Layout6x2; s.SpeedMMPerS = 50; s.GainMMPerMV = 20; s.DPI = 150 }},
		{"12x1 5mm/mV portrait", func(s *Style) {
			s.Layout = Layout12x1
			s.GainMMPerMV = 5
			s.PaperWMM, s.PaperHMM = 210, 297
			s.DPI = 150
		}},
		{"1x1 V1 thick letter", func(s *Style) {
			s.Layout = Layout1x1
			s.RhythmLeads = []string{"V1"}
			s.TraceWidthMM = 0.6
			s.PaperWMM, s.PaperHMM = 279.4, 215.9
			s.DPI = 200
			s.StartS = 0.37
		}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			st := plainStyle()
			tc.mod(&st)
			p, err := Render(rec, st)
			if err != nil {
				t.Fatal(err)
			}
			checkPixels(t, p, st)
		})
	}
}

// Real recordings drawn and checked the same way: PTB s0010_re (12 leads
// at 1000 Hz) and MIT-BIH 100 (MLII at 360 Hz, a lead name outside the
// standard twelve), both from ../shared/data (see its README).
func TestTruthMatchesPixelsOpenRecords(t *testing.T) {
	t.Parallel()
	ptb, err := wfdb.ReadRecord("../../shared/data/ptb-s0010_re/s0010_re")
	if err != nil {
		t.Fatal(err)
	}
	// s0010_re carries tens of µV of high-frequency noise, more than a
	// pixel at 200 dpi; smooth it (25 ms moving average) so shallow
	// stretches exist. The smoothed record is what gets drawn and is the
	// truth.
	for i := range ptb.Signals {
		smooth(ptb.Signals[i].MV, 25)
	}
	st := plainStyle()
	st.DPI = 200
	st.StartS = 3.2
	p, err := Render(ptb, st)
	if err != nil {
		t.Fatal(err)
	}
	if n := len(p.Truth.Signals.Signals); n != 12 {
		t.Fatalf("PTB render has %d truth leads, want 12", n)
	}
	checkPixels(t, p, st)

	mit, err := wfdb.ReadRecord("../../shared/data/mitdb-100/100")
	if err != nil {
		t.Fatal(err)
	}
	smooth(mit.Lead("MLII").MV, 5) // 14 ms at 360 Hz, as above
	st = plainStyle()
	st.Layout = Layout1x1
	st.RhythmLeads = []string{"MLII"}
	st.DPI = 200
	st.StartS = 60
	p, err = Render(mit, st)
	if err != nil {
		t.Fatal(err)
	}
	if s := p.Truth.Signals.Lead("MLII"); s == nil || s.RateHz != 360 {
		t.Fatalf("MIT-BIH render truth: %+v", p.Truth.Signals.Leads())
	}
	checkPixels(t, p, st)
}

// Truth signals are the record's samples over each lead's window, on
// the tracing clock.
func TestTruthSignals(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 2})
	st := DefaultStyle()
	st.DPI = 100
	st.StartS = 0.5 // 10 s record: only 9.5 s are left, columns shrink
	p, err := Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	tr := p.Truth
	colDur := tr.Panels[0].T1S - tr.Panels[0].T0S
	if colDur > 9.5/4+1e-9 || colDur < 2.3 {
		t.Fatalf("column lasts %v s, want the 9.5 s left split in four", colDur)
	}
	for _, name := range record.Standard12 {
		s := tr.Signals.Lead(name)
		if s == nil {
			t.Fatalf("no truth for %s", name)
		}
		src := rec.Lead(name)
		off := int(math.Round((s.StartS + st.StartS) * src.RateHz))
		for i, v := range s.MV {
			if v != src.MV[off+i] {
				t.Fatalf("%s sample %d: truth %v, record %v", name, i, v, src.MV[off+i])
			}
		}
		wantLen := colDur
		if name == "II" {
			wantLen = 4 * colDur // rhythm strip window wins
		}
		if got := float64(len(s.MV)) / s.RateHz; math.Abs(got-wantLen) > 1.5/s.RateHz {
			t.Errorf("%s: truth lasts %v s, want %v", name, got, wantLen)
		}
	}
	// Simultaneous columns (common practice for 3x4): column c of the
	// 3x4 starts at c × column duration.
	for _, pn := range tr.Panels {
		if !pn.Rhythm && math.Abs(pn.T0S-float64(pn.Col)*colDur) > 1e-9 {
			t.Errorf("%s: column %d starts at %v s", pn.Lead, pn.Col, pn.T0S)
		}
	}
}

// Cabrera sequence of the limb leads (common practice): aVL, I, −aVR,
// II, aVF, III, down the first two columns of a 3x4.
func TestCabreraOrder(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 4})
	st := DefaultStyle()
	st.Cabrera = true
	st.DPI = 100
	p, err := Render(rec, st)
	if err != nil {
		t.Fatal(err)
	}
	want := map[[2]int]string{
		{0, 0}: "aVL", {1, 0}: "I", {2, 0}: "-aVR", {0, 1}: "II", {1, 1}: "aVF", {2, 1}: "III",
		{0, 2}: "V1", {1, 2}: "V2", {2, 2}: "V3", {0, 3}: "V4", {1, 3}: "V5", {2, 3}: "V6",
	}
	for _, pn := range p.Truth.Panels {
		if pn.Rhythm {
			continue
		}
		if w := want[[2]int{pn.Row, pn.Col}]; w != pn.Lead {
			t.Errorf("row %d col %d: %s, want %s", pn.Row, pn.Col, pn.Lead, w)
		}
	}
	if p.Truth.Signals.Lead("aVR") == nil {
		t.Error("no aVR truth in Cabrera render")
	}
	std := DefaultStyle()
	std.DPI = 100
	q, _ := Render(rec, std)
	order := []string{}
	for _, pn := range q.Truth.Panels {
		order = append(order, pn.Lead)
	}
	// Standard order (common practice): I, II, III | aVR, aVL, aVF | V1-V3 | V4-V6.
	wantStd := []string{"I", "II", "III", "aVR", "aVL", "aVF", "V1", "V2", "V3", "V4", "V5", "V6", "II"}
	for i := range wantStd {
		if i >= len(order) || order[i] != wantStd[i] {
			t.Fatalf("standard order %v, want %v", order, wantStd)
		}
	}
}

// Pulse boxes: the top edge's ink lies on the box's y0, the rising and
// falling edges on x0 and x1, and the height is 1 mV at the gain.
func TestPulseBoxes(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 8})
	for _, st := range []Style{
		func() Style { s := DefaultStyle(); s.Grid = GridNone; return s }(),
		func() Style {
			s := DefaultStyle()
			s.Grid = GridNone
			s.GainMMPerMV, s.SpeedMMPerS, s.DPI, s.Layout = 5, 50, 200, Layout6x2
			return s
		}(),
	} {
		p, err := Render(rec, st)
		if err != nil {
			t.Fatal(err)
		}
		tr := p.Truth
		rows := 0
		for _, pn := range tr.Panels {
			rows = max(rows, pn.Row+1)
		}
		if len(tr.Pulses) != rows {
			t.Fatalf("%d pulses for %d rows", len(tr.Pulses), rows)
		}
		for i, b := range tr.Pulses {
			if h := (b[3] - b[1]) / tr.PxPerMMY; math.Abs(h-st.GainMMPerMV) > 1e-6 {
				t.Errorf("pulse %d is %v mm high, want %v (1 mV)", i, h, st.GainMMPerMV)
			}
			if w := (b[2] - b[0]) / tr.PxPerMMX; math.Abs(w-0.2*st.SpeedMMPerS) > 1e-6 {
				t.Errorf("pulse %d is %v mm wide, want %v (200 ms)", i, w, 0.2*st.SpeedMMPerS)
			}
			xm := int((b[0] + b[2]) / 2)
			if y, _ := inkCentroidY(p.Image, xm, b[1], 6); math.Abs(y-b[1]) > 0.5 {
				t.Errorf("pulse %d top at y=%.2f, truth %.2f", i, y, b[1])
			}
			ym := int((b[1] + b[3]) / 2)
			for _, xe := range []float64{b[0], b[2]} {
				var sw, swx float64
				for x := int(xe) - 6; x <= int(xe)+6; x++ {
					d := 255 - float64(p.Image.Pix[p.Image.PixOffset(x, ym)+1])
					sw += d
					swx += d * (float64(x) + 0.5)
				}
				if sw == 0 || math.Abs(swx/sw-xe) > 0.5 {
					t.Errorf("pulse %d edge at x=%.2f, truth %.2f", i, swx/sw, xe)
				}
			}
		}
	}
}

func TestRenderErrors(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 1})
	cases := []struct {
		name string
		rec  *record.Record
		st   Style
	}{
		{"nil record", nil, DefaultStyle()},
		{"empty record", &record.Record{}, DefaultStyle()},
		{"bad layout", rec, Style{Layout: "5x5"}},
		{"huge dpi", rec, Style{DPI: 1e5}},
		{"negative gain", rec, Style{GainMMPerMV: -3}},
		{"start past end", rec, Style{StartS: 50}},
		{"no drawn leads", &record.Record{Signals: []record.Signal{{Lead: "X", RateHz: 100, MV: make([]float64, 1000)}}}, DefaultStyle()},
		{"NaN speed", rec, Style{SpeedMMPerS: math.NaN()}},
	}
	for _, c := range cases {
		if _, err := Render(c.rec, c.st); err == nil {
			t.Errorf("%s: no error", c.name)
		}
	}
}

func TestRandomStylesRender(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{Seed: 3, NoiseMV: 0.01, WanderMV: 0.05})
	rng := newRand(99)
	n := 8
	if testing.Short() {
		n = 3
	}
	for i := 0; i < n; i++ {
		st := RandomStyle(rng)
		st.DPI = math.Min(st.DPI, 150) // keep the test quick
		p, err := Render(rec, st)
		if err != nil {
			t.Fatalf("style %d (%s): %v", i, st.Layout, err)
		}
		if len(p.Truth.Panels) == 0 || len(p.Truth.Signals.Signals) == 0 {
			t.Fatalf("style %d: empty truth", i)
		}
	}
}

func newRand(s int64) *rand.Rand { return rand.New(rand.NewSource(s)) }

// smooth replaces v by its centred moving average over n samples.
func smooth(v []float64, n int) {
	src := append([]float64(nil), v...)
	for i := range v {
		var s float64
		var c int
		for k := i - n/2; k <= i+n/2; k++ {
			if k >= 0 && k < len(src) {
				s += src[k]
				c++
			}
		}
		v[i] = s / float64(c)
	}
}
