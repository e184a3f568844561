package wfdb

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"tracelift/record"
)

// ptb12 returns the twelve standard leads of PTB record s0010_re (PTB
// Diagnostic ECG Database, PhysioNet), the first sec seconds.
func ptb12(t testing.TB, sec float64) *record.Record {
	t.Helper()
	rec, err := ReadRecord(shared + "ptb-s0010_re/s0010_re")
	if err != nil {
		t.Fatal(err)
	}
	out := &record.Record{Name: "s0010_re"}
	for _, l := range record.Standard12 {
		s := rec.Lead(l).Clone()
		s.MV = s.MV[:int(sec*s.RateHz)]
		out.Signals = append(out.Signals, s)
	}
	return out
}

func readAll(t *testing.T, dir, name string) (hea, dat []byte) {
	t.Helper()
	hea, err := os.ReadFile(filepath.Join(dir, name+".hea"))
	if err != nil {
		t.Fatal(err)
	}
	dat, err = os.ReadFile(filepath.Join(dir, name+".dat"))
	if err != nil {
		t.Fatal(err)
	}
	return hea, dat
}

// Write, read back with ReadRecord, write again: the values agree within
// half a quantization step and the second files equal the first byte for
// byte.
func TestWriteRoundTrip(t *testing.T) {
	t.Parallel()
	rec := ptb12(t, 10)
	rec.Signals[3].MV[5] = math.NaN()
	dir := t.TempDir()
	if err := WriteRecord(dir, "a", rec); err != nil {
		t.Fatal(err)
	}
	got, err := ReadRecord(filepath.Join(dir, "a.hea"))
	if err != nil {
		t.Fatal(err)
	}
	for i, s := range got.Signals {
		ref := rec.Signals[i]
		if s.Lead != ref.Lead || s.RateHz != 1000 || s.Len() != 10000 {
			t.Fatalf("%s %v %d", s.Lead, s.RateHz, s.Len())
		}
		for k, v := range s.MV {
			w := ref.MV[k]
			if math.IsNaN(v) != math.IsNaN(w) || math.Abs(v-w) > 0.0005+1e-12 { // half of 1 µV at 1000 adu/mV
				t.Fatalf("%s[%d] = %v, wrote %v", s.Lead, k, v, w)
			}
		}
	}
	h1, d1 := readAll(t, dir, "a")
	if err := WriteRecord(dir, "b", got); err != nil {
		t.Fatal(err)
	}
	h2, d2 := readAll(t, dir, "b")
	if !bytes.Equal(d1, d2) || !bytes.Equal(bytes.ReplaceAll(bytes.Replace(h1, []byte("a "), []byte("b "), 1), []byte("a.dat"), []byte("b.dat")), h2) {
		t.Fatalf("second write differs:\n%s\n%s", h1, h2)
	}
	// The gap is the format-16 invalid value −32768 (WFDB signal format
	// specification) at frame 5, signal 3.
	if v := int16(binary.LittleEndian.Uint16(d1[2*(5*12+3):])); v != math.MinInt16 {
		t.Fatalf("gap written as %d", v)
	}
	if !strings.HasPrefix(string(h1), "a 12 1000 10000\na.dat 16 1000(0)/mV 16 0 ") {
		t.Fatalf("header %q", h1[:60])
	}
}

// An independent decoder (numpy reading little-endian int16) recomputes
// the header's checksums (16-bit sum of samples) and first values (WFDB
// header format, "checksum" and "initial value" fields).
func TestChecksumsWithNumpy(t *testing.T) {
	t.Parallel()
	py := "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import numpy").Run(); err != nil {
		t.Skip("python3 with numpy not available")
	}
	rec := ptb12(t, 5)
	rec.Signals[0].MV[0] = math.NaN()
	dir := t.TempDir()
	if err := WriteRecord(dir, "c", rec); err != nil {
		t.Fatal(err)
	}
	script := `
import numpy as np, sys
hea = open(sys.argv[1] + ".hea").read().split("\n")
n = int(hea[0].split()[1])
d = np.fromfile(sys.argv[1] + ".dat", dtype="<i2").reshape(-1, n)
for j in range(n):
    f = hea[1 + j].split()
    s = int(d[:, j].astype(np.int64).sum())
    s = (s + 32768) % 65536 - 32768
    print(j, s == int(f[6]), int(d[0, j]) == int(f[5]), d.shape[0] == int(hea[0].split()[3]))
`
	out, err := exec.Command(py, "-c", script, filepath.Join(dir, "c")).CombinedOutput()
	if err != nil {
		t.Fatalf("%v %s", err, out)
	}
	lines := strings.Split(strings.TrimSpace(string(out)), "\n")
	if len(lines) != 12 {
		t.Fatalf("%s", out)
	}
	for _, l := range lines {
		if !strings.HasSuffix(l, "True True True") {
			t.Fatalf("numpy disagrees: %s", out)
		}
	}
}

// Leads at other rates are resampled to the fastest; later starts are
// padded with gaps; a nonzero start is noted.
func TestWriteMixed(t *testing.T) {
	t.Parallel()
	src := ptb12(t, 5)
	rec := &record.Record{Signals: []record.Signal{
		src.Signals[0].Clone(),
		src.Signals[1].Resample(500),
	}}
	rec.Signals[1].StartS = 2.5
	rec.Signals[1].MV = rec.Signals[1].MV[:1000] // 2 s at 500 Hz
	rec.Signals[0].StartS = 0.5
	dir := t.TempDir()
	if err := WriteRecord(dir, "m", rec); err != nil {
		t.Fatal(err)
	}
	got, err := ReadRecord(filepath.Join(dir, "m"))
	if err != nil {
		t.Fatal(err)
	}
	h, _ := ReadHeaderFile(filepath.Join(dir, "m.hea"))
	if h.FreqHz != 1000 || h.NSamples != 5000 || len(h.Comments) != 1 || h.Comments[0] != "start_s 0.5" {
		t.Fatalf("%+v", h)
	}
	ii := got.Signals[1]
	if !math.IsNaN(ii.MV[1999]) || math.IsNaN(ii.MV[2000]) || math.Abs(ii.MV[2000]-src.Signals[1].MV[0]) > 0.0005+1e-12 {
		t.Fatalf("start of lead II: %v %v", ii.MV[1999], ii.MV[2000])
	}
	// The 500 Hz samples land on every other frame.
	if math.Abs(ii.MV[2000+2*300]-src.Signals[1].MV[600]) > 0.0005+1e-12 || !math.IsNaN(ii.MV[4500]) {
		t.Fatal("resampled lead II")
	}
}

func TestChooseGain(t *testing.T) {
	t.Parallel()
	cases := []struct {
		max  float64
		want float64
	}{
		{1, 1000}, {32.767, 1000}, {32.7675, 500}, {65.534, 500}, {100, 200}, {1e4, 2}, {3e6, 0.01},
	}
	for _, c := range cases {
		g, err := ChooseGain([]float64{0, -c.max, math.NaN()})
		if err != nil || g != c.want {
			t.Errorf("max %v: gain %v (%v), want %v", c.max, g, err, c.want)
		}
	}
	if _, err := ChooseGain([]float64{4e6}); err == nil {
		t.Error("4e6 mV accepted")
	}
}

func TestWriteErrors(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	ok := &record.Record{Signals: []record.Signal{{Lead: "I", RateHz: 500, MV: []float64{1, 2}}}}
	for _, n := range []string{"", "a/b", "..", "a b", "x\n"} {
		if err := WriteRecord(dir, n, ok); err == nil || !strings.HasPrefix(err.Error(), "wfdb: ") {
			t.Errorf("name %q: %v", n, err)
		}
	}
	if err := WriteRecord(dir, "e", &record.Record{}); err == nil {
		t.Error("empty record accepted")
	}
	big := &record.Record{Signals: []record.Signal{{Lead: "I", RateHz: 500, MV: []float64{1e12}}}}
	if err := WriteRecord(dir, "e", big); err == nil || !strings.Contains(err.Error(), "lead I") {
		t.Errorf("huge value: %v", err)
	}
	if err := WriteRecord(filepath.Join(dir, "missing"), "e", ok); err == nil {
		t.Error("missing directory accepted")
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 0 {
		t.Errorf("left files behind: %v", ents)
	}
}

func BenchmarkWriteRecord12x10s(b *testing.B) {
	rec := ptb12(b, 10)
	dir := b.TempDir()
	b.ReportAllocs()
	for b.Loop() {
		if err := WriteRecord(dir, "bench", rec); err != nil {
			b.Fatal(err)
		}
	}
}

// save2gdf (biosig-tools, an independent WFDB reader) reads our header and
// annotations: labels, rate, length, units, gain, beat codes and places.
// Its values are compared on single-signal records: biosig 3.0.1 (Debian
// 12) misplaces samples of multiplexed multi-signal format-16 files, the
// shared test01_00s from PhysioNet included, so that comparison would
// test biosig, not us.
func TestSave2gdfReadsOurRecord(t *testing.T) {
	t.Parallel()
	exe, err := exec.LookPath("save2gdf")
	if err != nil {
		t.Skip("save2gdf (Debian biosig-tools) not installed")
	}
	rec := ptb12(t, 10)
	rec.Annotations = []record.Annotation{{TS: 0.5, Code: "N"}, {TS: 0.9, Code: "V"}, {TS: 1.25, Code: "note", Text: "check"}}
	dir := t.TempDir()
	if err := WriteRecord(dir, "w", rec); err != nil {
		t.Fatal(err)
	}
	js, err := exec.Command(exe, "-JSON", filepath.Join(dir, "w.hea")).Output()
	if err != nil {
		t.Fatal(err)
	}
	if i := bytes.IndexByte(js, '{'); i >= 0 {
		js = js[i:]
	}
	var hdr struct {
		TYPE            string
		Samplingrate    float64
		NumberOfSamples int
		CHANNEL         []struct {
			Label        string
			Samplingrate float64
			PhysicalUnit string
			Scaling      float64 `json:"scaling"`
		}
		EVENT []struct {
			TYP string
			POS float64
		}
	}
	if err := json.Unmarshal(js, &hdr); err != nil {
		t.Fatalf("%v\n%s", err, js)
	}
	if hdr.TYPE != "MIT" || hdr.Samplingrate != 1000 || hdr.NumberOfSamples != 10000 || len(hdr.CHANNEL) != 12 {
		t.Fatalf("save2gdf header %+v", hdr)
	}
	for i, c := range hdr.CHANNEL {
		if c.Label != record.Standard12[i] || c.Samplingrate != 1000 || c.PhysicalUnit != "mV" || c.Scaling != 0.001 {
			t.Fatalf("channel %d: %+v", i, c)
		}
	}
	// Codes 1 (N), 5 (V), 22 (NOTE) per the WFDB code table; biosig
	// reports positions one sample early, so one sample is allowed.
	wantTyp := []string{"0x0001", "0x0005", "0x0016"}
	if len(hdr.EVENT) != 3 {
		t.Fatalf("events %+v", hdr.EVENT)
	}
	for i, e := range hdr.EVENT {
		if e.TYP != wantTyp[i] || math.Abs(e.POS-rec.Annotations[i].TS) > 1.5e-3 {
			t.Fatalf("event %d: %+v", i, e)
		}
	}
	for i := 0; i < 12; i += 5 { // leads I, aVL, V5
		one := &record.Record{Signals: []record.Signal{rec.Signals[i]}}
		name := fmt.Sprintf("one%d", i)
		if err := WriteRecord(dir, name, one); err != nil {
			t.Fatal(err)
		}
		csvPath := filepath.Join(dir, name+".csv")
		if out, err := exec.Command(exe, "-CSV", filepath.Join(dir, name+".hea"), csvPath).CombinedOutput(); err != nil {
			t.Fatalf("%v %s", err, out)
		}
		b, err := os.ReadFile(csvPath)
		if err != nil {
			t.Fatal(err)
		}
		lines := strings.Split(strings.TrimSpace(string(b)), "\n")
		if len(lines) != 10001 || lines[0] != `"`+record.Standard12[i]+` [mV]"` {
			t.Fatalf("%d lines, header %q", len(lines), lines[0])
		}
		for k, v := range rec.Signals[i].MV {
			g, err := strconv.ParseFloat(strings.TrimSpace(lines[k+1]), 64)
			if err != nil || math.Abs(g-v) > 0.001 { // one step at 1000 adu/mV
				t.Fatalf("%s[%d]: save2gdf %q, ours %v", record.Standard12[i], k, lines[k+1], v)
			}
		}
	}
}
