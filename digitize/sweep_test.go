package digitize

import (
	"fmt"
	"image"
	"math"
	"math/rand"
	"os"
	"runtime"
	"sort"
	"strings"
	"testing"
	"time"

	"tracelift/calib"
	"tracelift/record"
	"tracelift/record/wfdb"
	"tracelift/samples"
)

// rectifyFromTruth undoes a degradation's geometry with the renderer's
// own page-to-image map, giving the page back at the clean render's scale
// (what an ideal calib.Detect would return), sampled bilinearly.
func rectifyFromTruth(p *samples.Printout, w, h int) *image.NRGBA {
	out := image.NewNRGBA(image.Rect(0, 0, w, h))
	src := p.Image
	sw, sh := src.Rect.Dx(), src.Rect.Dy()
	hm := p.Truth.PageToImage
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			u, v := samples.Apply(hm, float64(x)+0.5, float64(y)+0.5)
			u, v = u-0.5, v-0.5
			i, j := int(math.Floor(u)), int(math.Floor(v))
			fx, fy := u-float64(i), v-float64(j)
			o := out.Pix[y*out.Stride+4*x:]
			if i < 0 || j < 0 || i+1 >= sw || j+1 >= sh {
				o[0], o[1], o[2], o[3] = 255, 255, 255, 255
				continue
			}
			for c := 0; c < 4; c++ {
				a := float64(src.Pix[j*src.Stride+4*i+c])
				b := float64(src.Pix[j*src.Stride+4*(i+1)+c])
				cc := float64(src.Pix[(j+1)*src.Stride+4*i+c])
				d := float64(src.Pix[(j+1)*src.Stride+4*(i+1)+c])
				o[c] = uint8(a*(1-fx)*(1-fy) + b*fx*(1-fy) + cc*(1-fx)*fy + d*fx*fy + 0.5)
			}
		}
	}
	return out
}

// ptbTen reads PTB s0010_re, resamples it to 500 Hz and keeps the first
// 10 s of the twelve standard leads.
func ptbTen(t testing.TB) *record.Record {
	t.Helper()
	rec, err := wfdb.ReadRecord("../../shared/data/ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	out := &record.Record{Name: "ptb-s0010_re"}
	for _, l := range record.Standard12 {
		s := rec.Lead(l)
		if s == nil {
			t.Fatalf("PTB record lacks %s", l)
		}
		r := s.Resample(500)
		r.MV = r.MV[:5000]
		r.StartS = 0
		out.Signals = append(out.Signals, r)
	}
	return out
}

// TestTraceSweep renders records across conditions, digitizes them and
// prints the median per-lead SNR per condition. Benchmark goals from the
// issue: ≥ 25 dB clean 300-dpi, ≥ 20 dB rotated or photocopied, ≥ 15 dB
// phone photos, ≥ 12 dB faxes; no lead missing.
//
//	TRACELIFT_SWEEP=1 go test -run TestTraceSweep -v ./digitize
//	TRACELIFT_SWEEP=1 TRACELIFT_SWEEP_CALIB=1 go test -run TestTraceSweep -v ./digitize  (end to end through calib.Detect)
func TestTraceSweep(t *testing.T) {
	if os.Getenv("TRACELIFT_SWEEP") == "" {
		t.Skip("set TRACELIFT_SWEEP=1 to run the sweep")
	}
	n := 3
	if v := os.Getenv("TRACELIFT_SWEEP_N"); v != "" {
		fmt.Sscan(v, &n)
	}
	recs := []*record.Record{ptbTen(t)}
	for i := 0; i < n; i++ {
		recs = append(recs, dipoleRecord(int64(100+i)))
	}
	// How much of the PTB record a pixel column can hold at all: its SNR
	// against itself averaged over two samples (4 ms, a little more than
	// one 3.4 ms column at 300 dpi and 25 mm/s).
	var ceil []float64
	for _, sg := range recs[0].Signals {
		sm := sg.Clone()
		for i := 1; i < len(sm.MV); i++ {
			sm.MV[i] = (sg.MV[i] + sg.MV[i-1]) / 2
		}
		ceil = append(ceil, record.Compare(&sg, &sm, 0, 10).SNRdB)
	}
	sort.Float64s(ceil)
	t.Logf("PTB s0010_re: median SNR of the record against its own 2-sample average: %.1f dB (an upper bound for any tracing at 300 dpi)", ceil[len(ceil)/2])
	viaCalib := os.Getenv("TRACELIFT_SWEEP_CALIB") != ""
	if viaCalib {
		t.Log("calibration: calib.Detect on the degraded image (end to end)")
	} else {
		t.Log("calibration: built from the renderer's truth (scale, gain, speed, and for degraded pages the inverse of its page-to-image map); calib.Detect is not used (TRACELIFT_SWEEP_CALIB=1 uses it)")
	}
	rng := rand.New(rand.NewSource(7))
	type row struct {
		snr     []float64
		missing int
		pages   int
		secs    []float64
		layouts int
	}
	table := map[string]*row{}
	for _, cond := range samples.Conditions {
		r := &row{}
		table[cond] = r
		for ri, rec := range recs {
			st := samples.DefaultStyle()
			if ri%2 == 1 {
				st.Layout, st.RhythmLeads = []samples.Layout{samples.Layout6x2, samples.Layout3x4R3, samples.Layout12x1}[ri/2%3], nil
			}
			p, err := samples.Render(rec, st)
			if err != nil {
				t.Fatal(err)
			}
			w, h := p.Image.Rect.Dx(), p.Image.Rect.Dy()
			q := p
			if cond != "clean" {
				q, err = samples.Degrade(p, samples.Condition(cond, rng))
				if err != nil {
					t.Fatal(err)
				}
			}
			cal := &calib.Result{
				Rectified: rectifyFromTruth(q, w, h), PxPerMM: p.Truth.PxPerMMX,
				PxPerMMX: q.Truth.PxPerMMX, PxPerMMY: q.Truth.PxPerMMY,
				GainMMPerMV: p.Truth.GainMMPerMV, SpeedMMPerS: p.Truth.SpeedMMPerS, Source: "truth",
			}
			if cond == "clean" {
				cal.Rectified = q.Image
			}
			if viaCalib {
				c, err := calib.Detect(contextBG(), &calib.Page{Image: q.Image}, calib.Options{})
				if err != nil {
					t.Logf("%s %s %s: calib: %v", cond, rec.Name, st.Layout, err)
					r.pages++
					r.missing += len(p.Truth.Signals.Signals)
					continue
				}
				cal = c
				if os.Getenv("TRACELIFT_SWEEP_OWNINK") != "" {
					cal.Ink = nil // trace on our own ink map of calib's rectified page
				}
			}
			t0 := time.Now()
			res, err := runCal(cal)
			r.secs = append(r.secs, time.Since(t0).Seconds())
			r.pages++
			if err != nil {
				t.Logf("%s %s %s: %v", cond, rec.Name, st.Layout, err)
				r.missing += len(p.Truth.Signals.Signals)
				continue
			}
			if res.Layout == string(st.Layout) {
				r.layouts++
			}
			acc := scoreLeads(p.Truth.Signals, res.Record)
			var per []string
			for _, l := range p.Truth.Signals.Leads() {
				a := acc[l]
				if math.IsInf(a.SNRdB, -1) {
					r.missing++
				}
				r.snr = append(r.snr, a.SNRdB)
				per = append(per, fmt.Sprintf("%s %.1f", l, a.SNRdB))
			}
			t.Logf("%-9s %-12s %-5s found %-5s median %.1f dB  %.2f s  [%s]", cond, rec.Name, st.Layout, res.Layout, medianSNR(acc), r.secs[len(r.secs)-1], strings.Join(per, ", "))
			runtime.GC()
		}
	}
	t.Log("condition   pages  median-SNR-dB  p10-SNR-dB  missing-leads  layout-right  median-s")
	for _, cond := range samples.Conditions {
		r := table[cond]
		sort.Float64s(r.snr)
		sort.Float64s(r.secs)
		med, p10, secs := math.Inf(-1), math.Inf(-1), math.NaN()
		if len(r.secs) > 0 {
			secs = r.secs[len(r.secs)/2]
		}
		if len(r.snr) > 0 {
			med, p10 = r.snr[len(r.snr)/2], r.snr[len(r.snr)/10]
		}
		t.Logf("%-10s %5d  %13.1f  %10.1f  %13d  %8d/%d  %8.2f", cond, r.pages, med, p10, r.missing, r.layouts, r.pages, secs)
	}
}

func runCal(cal *calib.Result) (*Result, error) {
	return Run(contextBG(), cal, Options{})
}
