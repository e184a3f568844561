package wfdb

import (
	"math"
	"testing"
)

const shared = "../../../shared/data/"

// Einthoven's law II = I + III holds sample by sample in the PTB record
// s0010_re (PTB Diagnostic ECG Database, PhysioNet; the shared data README
// states it holds within the recorder's rounding). With a gain of 2000
// adu/mV one quantization step is 0.5 µV; the derived leads were computed
// and rounded by the recorder, so a residual of a few steps is allowed.
func TestEinthovenOnPTB(t *testing.T) {
	rec, err := ReadRecord(shared + "ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	if got := len(rec.Signals); got != 15 {
		t.Fatalf("%d signals, want 15", got)
	}
	i, ii, iii := rec.Lead("I"), rec.Lead("II"), rec.Lead("III")
	if i == nil || ii == nil || iii == nil {
		t.Fatalf("leads missing: %v", rec.Leads())
	}
	if i.Len() != 38400 || i.RateHz != 1000 {
		t.Fatalf("len %d rate %v", i.Len(), i.RateHz)
	}
	var worst float64
	for k := range i.MV {
		worst = math.Max(worst, math.Abs(ii.MV[k]-(i.MV[k]+iii.MV[k])))
	}
	if worst > 0.0015 { // 3 quantization steps of 0.5 µV
		t.Fatalf("Einthoven residual %.4f mV", worst)
	}
	// Goldberger: aVR = -(I+II)/2.
	avr := rec.Lead("aVR")
	worst = 0
	for k := range i.MV {
		worst = math.Max(worst, math.Abs(avr.MV[k]+(i.MV[k]+ii.MV[k])/2))
	}
	if worst > 0.0015 {
		t.Fatalf("Goldberger aVR residual %.4f mV", worst)
	}
	// The header's first-sample values (column "initval") match the data.
	h, _ := ReadHeaderFile(shared + "ptb-s0010_re/s0010_re.hea")
	if got := i.MV[0] * 2000; math.Abs(got-float64(h.Signals[0].InitVal)) > 1e-9 {
		t.Fatalf("first sample %v, header initval %d", got, h.Signals[0].InitVal)
	}
}

// MIT-BIH record 100 uses format 212; the header's checksum field is the
// 16-bit sum of all samples (WFDB header specification), which checks
// every packed sample of both signals.
func TestFormat212Checksum(t *testing.T) {
	h, err := ReadHeaderFile(shared + "mitdb-100/100.hea")
	if err != nil {
		t.Fatal(err)
	}
	rec, err := ReadRecord(shared + "mitdb-100/100")
	if err != nil {
		t.Fatal(err)
	}
	if rec.Signals[0].Lead != "MLII" || rec.Signals[1].Lead != "V5" {
		t.Fatalf("leads %v", rec.Leads())
	}
	for k, s := range h.Signals {
		var sum int16
		sig := rec.Signals[k]
		for _, v := range sig.MV {
			sum += int16(math.Round(v*s.Gain) + float64(s.Baseline))
		}
		if int(sum) != s.Checksum {
			t.Fatalf("signal %d checksum %d, header %d", k, sum, s.Checksum)
		}
		if got := math.Round(sig.MV[0]*s.Gain) + float64(s.Baseline); int(got) != s.InitVal {
			t.Fatalf("signal %d first sample %v, header %d", k, got, s.InitVal)
		}
	}
	if n := rec.Signals[0].Len(); n != 650000 {
		t.Fatalf("%d samples", n)
	}
}

func TestGainWithUnits(t *testing.T) {
	rec, err := ReadRecord(shared + "wfdb-test01_00s/test01_00s")
	if err != nil {
		t.Fatal(err)
	}
	h, _ := ReadHeaderFile(shared + "wfdb-test01_00s/test01_00s.hea")
	for k, s := range h.Signals {
		var sum int16
		for _, v := range rec.Signals[k].MV {
			sum += int16(math.Round(v * 100))
		}
		if int(sum) != s.Checksum {
			t.Fatalf("signal %d checksum %d want %d", k, sum, s.Checksum)
		}
	}
}
