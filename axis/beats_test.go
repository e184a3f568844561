package axis

import (
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"testing"

	"tracelift/record"
	"tracelift/record/wfdb"
)

const shared = "../../shared/data/"

// readMITAnnotations decodes a WFDB annotation file in the MIT format
// (PhysioNet's WFDB annotation-file specification, from memory): 16-bit
// little-endian words, the top 6 bits the type code, the low 10 bits the
// time since the previous annotation; code 59 (SKIP) is followed by a
// 32-bit interval stored high word first; 60–62 (NUM, SUB, CHN) carry a
// value in the low bits; 63 (AUX) is followed by that many bytes padded to
// even; a zero word ends the file. It returns the sample index and code of
// every annotation.
func readMITAnnotations(path string) (samples []int64, codes []int, err error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		return nil, nil, err
	}
	var t int64
	for p := 0; p+1 < len(raw); {
		w := binary.LittleEndian.Uint16(raw[p:])
		p += 2
		a, iv := int(w>>10), int64(w&0x3FF)
		switch {
		case a == 0 && iv == 0:
			return samples, codes, nil
		case a == 59:
			if p+4 > len(raw) {
				return nil, nil, fmt.Errorf("short SKIP")
			}
			hi := int64(binary.LittleEndian.Uint16(raw[p:]))
			lo := int64(binary.LittleEndian.Uint16(raw[p+2:]))
			p += 4
			t += int64(int32(hi<<16 | lo))
		case a == 63:
			p += int(iv) + int(iv)%2
		case a >= 60:
			// NUM, SUB, CHN modify the previous annotation only.
		default:
			t += iv
			samples = append(samples, t)
			codes = append(codes, a)
		}
	}
	return samples, codes, nil
}

// isBeatCode lists the MIT annotation codes that mark a beat (the WFDB
// library's beat table, from memory): N L R a V F J A S E j / Q e n f and
// the r-on-t beat.
func isBeatCode(c int) bool {
	switch c {
	case 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 16, 25, 30, 34, 35, 38, 41:
		return true
	}
	return false
}

// matchBeats pairs detected and reference beat times one to one within
// tol seconds, in time order, and returns true positives, false negatives
// and false positives.
func matchBeats(ref, det []float64, tol float64) (tp, fn, fp int) {
	i, j := 0, 0
	for i < len(ref) && j < len(det) {
		d := det[j] - ref[i]
		switch {
		case math.Abs(d) <= tol:
			tp++
			i++
			j++
		case d < 0:
			fp++
			j++
		default:
			fn++
			i++
		}
	}
	fn += len(ref) - i
	fp += len(det) - j
	return
}

// MIT-BIH Arrhythmia Database record 100 (Moody and Mark 2001, PhysioNet),
// lead MLII at 360 Hz, against its reference annotations 100.atr. The
// target, sensitivity and positive predictivity of at least 99.5 % with a
// 150 ms matching window, follows the ANSI/AAMI EC57 convention (from
// memory). The whole 30 min record is scored (EC57 allows skipping the
// first 5 min as a learning period; we do not).
func TestDetectBeatsMITBIH100(t *testing.T) {
	if testing.Short() {
		t.Skip("30 min record")
	}
	rec, err := wfdb.ReadRecord(shared + "mitdb-100/100.hea")
	if err != nil {
		t.Fatal(err)
	}
	ml := rec.Lead("MLII")
	if ml == nil {
		t.Fatalf("no MLII in %v", rec.Leads())
	}
	samp, codes, err := readMITAnnotations(shared + "mitdb-100/100.atr")
	if err != nil {
		t.Fatal(err)
	}
	var ref []float64
	for k, s := range samp {
		if isBeatCode(codes[k]) {
			ref = append(ref, float64(s)/ml.RateHz)
		}
	}
	if len(ref) < 2000 {
		t.Fatalf("only %d reference beats read", len(ref))
	}
	det, err := DetectBeats(ml)
	if err != nil {
		t.Fatal(err)
	}
	tp, fn, fp := matchBeats(ref, det, 0.150)
	se := float64(tp) / float64(tp+fn)
	ppv := float64(tp) / float64(tp+fp)
	t.Logf("record 100 MLII: %d reference beats, %d detected, TP %d FN %d FP %d, Se %.2f %%, +P %.2f %%",
		len(ref), len(det), tp, fn, fp, 100*se, 100*ppv)
	if se < 0.995 || ppv < 0.995 {
		t.Fatalf("Se %.4f +P %.4f, want both ≥ 0.995", se, ppv)
	}
}

// The detector must not depend on the sampling rate: the same record
// resampled to 250 Hz and 1000 Hz (first 5 minutes) still meets the
// EC57-style target against 100.atr (as above).
func TestDetectBeatsAnyRate(t *testing.T) {
	rec, err := wfdb.ReadRecord(shared + "mitdb-100/100.hea")
	if err != nil {
		t.Fatal(err)
	}
	ml := rec.Lead("MLII")
	five := record.Signal{Lead: ml.Lead, RateHz: ml.RateHz, MV: ml.MV[:int(300*ml.RateHz)]}
	samp, codes, err := readMITAnnotations(shared + "mitdb-100/100.atr")
	if err != nil {
		t.Fatal(err)
	}
	var ref []float64
	for k, s := range samp {
		if tt := float64(s) / ml.RateHz; isBeatCode(codes[k]) && tt < 300 {
			ref = append(ref, tt)
		}
	}
	for _, hz := range []float64{250, 1000} {
		t.Run(fmt.Sprint(hz), func(t *testing.T) {
			s := five.Resample(hz)
			det, err := DetectBeats(&s)
			if err != nil {
				t.Fatal(err)
			}
			tp, fn, fp := matchBeats(ref, det, 0.150)
			se := float64(tp) / float64(tp+fn)
			ppv := float64(tp) / float64(tp+fp)
			t.Logf("%v Hz: Se %.2f %% +P %.2f %%", hz, 100*se, 100*ppv)
			if se < 0.995 || ppv < 0.995 {
				t.Fatalf("Se %.4f +P %.4f", se, ppv)
			}
		})
	}
}

func TestDetectBeatsBadInput(t *testing.T) {
	if _, err := DetectBeats(nil); err == nil {
		t.Fatal("nil signal accepted")
	}
	s := &record.Signal{Lead: "II", RateHz: 500, MV: make([]float64, 200)}
	if _, err := DetectBeats(s); err == nil {
		t.Fatal("0.4 s accepted")
	}
	nan := make([]float64, 5000)
	for i := range nan {
		nan[i] = math.NaN()
	}
	if _, err := DetectBeats(&record.Signal{Lead: "II", RateHz: 500, MV: nan}); err == nil {
		t.Fatal("all-gap lead accepted")
	}
	// A flat line has no beats and must not panic.
	flat, err := DetectBeats(&record.Signal{Lead: "II", RateHz: 500, MV: make([]float64, 5000)})
	if err != nil {
		t.Fatal(err)
	}
	if len(flat) > 0 {
		t.Fatalf("%d beats on a flat line", len(flat))
	}
}

// Premature beats on record 100: its reference annotations mark 33 atrial
// premature beats (A) and one ventricular (V) (MIT-BIH Arrhythmia
// Database directory, from memory; counted here from 100.atr itself).
// Measure's timing rule (RR below 80 % of the median) should catch most
// of them and flag few normal beats.
func TestPrematureMITBIH100(t *testing.T) {
	if testing.Short() {
		t.Skip("30 min record")
	}
	rec, err := wfdb.ReadRecord(shared + "mitdb-100/100.hea")
	if err != nil {
		t.Fatal(err)
	}
	samp, codes, err := readMITAnnotations(shared + "mitdb-100/100.atr")
	if err != nil {
		t.Fatal(err)
	}
	var prem, normal []float64
	for k, s := range samp {
		switch codes[k] {
		case 8, 5: // A, V
			prem = append(prem, float64(s)/360)
		case 1: // N
			normal = append(normal, float64(s)/360)
		}
	}
	if len(prem) != 34 {
		t.Fatalf("%d A/V beats in 100.atr, expected 34", len(prem))
	}
	f, err := Measure(rec, Options{BeatLead: "MLII"})
	if err != nil {
		t.Fatal(err)
	}
	var flagged []float64
	for _, b := range f.Beats {
		if b.Premature {
			flagged = append(flagged, b.TS)
		}
	}
	tp, _, _ := matchBeats(prem, flagged, 0.15)
	fpN, _, _ := matchBeats(normal, flagged, 0.15)
	t.Logf("record 100: %d beats flagged premature; %d of %d A/V beats caught, %d normal beats flagged; rate %.1f bpm", len(flagged), tp, len(prem), fpN, f.HeartRateBPM)
	if tp < len(prem)*2/3 || fpN > 10 {
		t.Fatalf("premature: caught %d of %d, %d normal beats flagged", tp, len(prem), fpN)
	}
	// Rate: the reference beats' count over their time span.
	var beats []float64
	for k, s := range samp {
		if isBeatCode(codes[k]) {
			beats = append(beats, float64(s)/360)
		}
	}
	ref := 60 * float64(len(beats)-1) / (beats[len(beats)-1] - beats[0])
	if d := math.Abs(float64(f.HeartRateBPM) - ref); !(d <= 1) {
		t.Errorf("rate %.2f bpm, annotations give %.2f", f.HeartRateBPM, ref)
	}
}
