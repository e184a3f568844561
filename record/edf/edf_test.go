package edf

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"tracelift/record"
	"tracelift/record/wfdb"
)

const shared = "../../../shared/data/"

// ptb12 returns the twelve standard leads of PTB record s0010_re (PTB
// Diagnostic ECG Database, PhysioNet), the first sec seconds.
func ptb12(t testing.TB, sec float64) *record.Record {
	t.Helper()
	rec, err := wfdb.ReadRecord(shared + "ptb-s0010_re/s0010_re")
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

// step is one quantization step of a written lead: the physical range
// over the 65534 digital steps (EDF specification, section 2.1.3.4: the
// linear map from digital to physical minimum and maximum).
func step(t *testing.T, raw []byte, ns, i int) float64 {
	t.Helper()
	fld := func(off, n int) float64 {
		v, err := strconv.ParseFloat(strings.TrimSpace(string(raw[256+ns*off+i*n:256+ns*off+i*n+n])), 64)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	return (fld(112, 8) - fld(104, 8)) / float64(DigitalMax-DigitalMin)
}

func TestRoundTrip(t *testing.T) {
	t.Parallel()
	rec := ptb12(t, 10)
	for i := range rec.Signals {
		rec.Signals[i].StartS = 0.25
	}
	rec.Signals[2].MV[100] = math.NaN()
	rec.Signals[5].StartS = 2.75 // a later lead, padded with gaps
	rec.Signals[5].MV = rec.Signals[5].MV[:2500]
	rec.Annotations = []record.Annotation{
		{TS: 0.5, Code: "N"},
		{TS: 1.25, Code: "V", Text: "wide"},
		{TS: 9.9, Code: "note", Text: "check V1 here"},
		{TS: 3, Code: "note", Text: "ok"}, // would read as a code alone
	}
	var buf bytes.Buffer
	if err := Write(&buf, rec, Options{}); err != nil {
		t.Fatal(err)
	}
	raw := buf.Bytes()
	got, anns, err := Read(bytes.NewReader(raw))
	if err != nil {
		t.Fatal(err)
	}
	for i, s := range got.Signals {
		ref := rec.Signals[i]
		if s.Lead != ref.Lead || s.RateHz != 1000 || s.StartS != ref.StartS || s.Len() != ref.Len() {
			t.Fatalf("%s rate %v start %v len %d; want %s %v %d", s.Lead, s.RateHz, s.StartS, s.Len(), ref.Lead, ref.StartS, ref.Len())
		}
		q := step(t, raw, 13, i)
		for k, v := range s.MV {
			w := ref.MV[k]
			if math.IsNaN(v) != math.IsNaN(w) || math.Abs(v-w) > q/2+1e-12 {
				t.Fatalf("%s[%d] = %v, wrote %v (step %g)", s.Lead, k, v, w, q)
			}
		}
	}
	want := []record.Annotation{rec.Annotations[0], rec.Annotations[1], rec.Annotations[3], rec.Annotations[2]}
	if len(anns) != 4 {
		t.Fatalf("annotations %+v", anns)
	}
	for i, a := range anns {
		if a != want[i] {
			t.Fatalf("annotation %d: %+v, want %+v", i, a, want[i])
		}
	}
	// Fixed header fields (EDF+ specification, section 2.1): version "0",
	// anonymised patient "X X X X", unknown start date "01.01.85" with
	// "Startdate X", "EDF+C", 1 s records.
	h := string(raw[:256])
	for _, c := range []struct {
		off, n int
		want   string
	}{{0, 8, "0"}, {8, 80, "X X X X"}, {88, 80, "Startdate X X X tracelift"}, {168, 8, "01.01.85"}, {176, 8, "00.00.00"}, {184, 8, "3584"}, {192, 44, "EDF+C"}, {244, 8, "1"}, {252, 4, "13"}} {
		if got := strings.TrimSpace(h[c.off : c.off+c.n]); got != c.want {
			t.Errorf("header bytes %d..%d = %q, want %q", c.off, c.off+c.n, got, c.want)
		}
	}
}

// save2gdf (biosig-tools, an independent EDF implementation) reads our
// file: labels, rates, units, the start, the annotations, and every value
// within one quantization step (its CSV prints 6 significant digits).
func TestSave2gdf(t *testing.T) {
	t.Parallel()
	exe, err := exec.LookPath("save2gdf")
	if err != nil {
		t.Skip("save2gdf (Debian biosig-tools) not installed")
	}
	rec := ptb12(t, 10)
	rec.Annotations = []record.Annotation{{TS: 0.5, Code: "N"}, {TS: 1.25, Code: "note", Text: "check V1 here"}}
	rec.Signals[2].MV[100] = math.NaN()
	dir := t.TempDir()
	p := filepath.Join(dir, "a.edf")
	start := time.Date(2024, 3, 5, 14, 30, 15, 0, time.UTC)
	if err := WriteFile(p, rec, Options{Start: start}); err != nil {
		t.Fatal(err)
	}
	raw, _ := os.ReadFile(p)
	js, err := exec.Command(exe, "-JSON", p).Output()
	if err != nil {
		t.Fatal(err)
	}
	if i := bytes.IndexByte(js, '{'); i >= 0 {
		js = js[i:] // it prints the command line first
	}
	var hdr struct {
		Samplingrate     float64
		NumberOfSamples  int
		StartOfRecording string
		CHANNEL          []struct {
			Label        string
			Samplingrate float64
			PhysicalUnit string
		}
		EVENT []struct {
			POS         float64
			Description string
		}
	}
	if err := json.Unmarshal(js, &hdr); err != nil {
		t.Fatalf("%v\n%s", err, js)
	}
	// biosig keeps times as fractions of a day, printing 14:30:14.999986
	// for 14:30:15; 1 ms covers that.
	st, err := time.Parse("2006-01-02 15:04:05.999999", hdr.StartOfRecording)
	if err != nil {
		st, err = time.Parse("2006-01-02 15:04:05", hdr.StartOfRecording)
	}
	if err != nil || st.Sub(start).Abs() > time.Millisecond || hdr.NumberOfSamples != 10000 || hdr.Samplingrate != 1000 {
		t.Fatalf("save2gdf header %+v (%v)", hdr, err)
	}
	if len(hdr.CHANNEL) < 12 {
		t.Fatalf("%d channels", len(hdr.CHANNEL))
	}
	for i, c := range hdr.CHANNEL[:12] {
		if c.Label != "ECG "+record.Standard12[i] || c.Samplingrate != 1000 || c.PhysicalUnit != "mV" {
			t.Fatalf("channel %d: %+v", i, c)
		}
	}
	if len(hdr.EVENT) != 2 || hdr.EVENT[0].Description != "N" || hdr.EVENT[1].Description != "check V1 here" ||
		math.Abs(hdr.EVENT[0].POS-0.5) > 1e-3 || math.Abs(hdr.EVENT[1].POS-1.25) > 1e-3 {
		t.Fatalf("events %+v", hdr.EVENT)
	}
	if out, err := exec.Command(exe, "-CSV", p, filepath.Join(dir, "a.csv")).CombinedOutput(); err != nil {
		t.Fatalf("%v %s", err, out)
	}
	f, err := os.Open(filepath.Join(dir, "a.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 10001 || rows[0][0] != "ECG I [mV]" {
		t.Fatalf("%d rows, header %v", len(rows), rows[0])
	}
	for i, s := range rec.Signals {
		q := step(t, raw, 13, i)
		for k, v := range s.MV {
			g, err := strconv.ParseFloat(rows[k+1][i], 64)
			if err != nil {
				t.Fatal(err)
			}
			if math.IsNaN(v) {
				// save2gdf maps −32768 linearly: one step below the
				// declared physical minimum, out of the signal's range.
				pmin, _ := strconv.ParseFloat(strings.TrimSpace(string(raw[256+13*104+8*i:256+13*104+8*i+8])), 64)
				if !(g < pmin) {
					t.Fatalf("gap read by save2gdf as %v, inside the range (min %v)", g, pmin)
				}
				continue
			}
			if math.Abs(g-v) > q+5e-6*math.Abs(v)+1e-7 {
				t.Fatalf("%s[%d]: save2gdf %v, ours %v (step %g)", s.Lead, k, g, v, q)
			}
		}
	}
}

func TestWriteErrors(t *testing.T) {
	t.Parallel()
	cases := map[string]*record.Record{
		"nil":   nil,
		"empty": {},
		"rate":  {Signals: []record.Signal{{Lead: "I", RateHz: 333.3333, MV: []float64{1}}}},
		"huge":  {Signals: []record.Signal{{Lead: "I", RateHz: 500, MV: []float64{1e12}}}},
		"label": {Signals: []record.Signal{{Lead: "rhythm strip number one", RateHz: 500, MV: []float64{1}}, {Lead: "rhythm strip number two", RateHz: 500, MV: []float64{1}}}},
		"far":   {Signals: []record.Signal{{Lead: "I", RateHz: 500, MV: []float64{1}}, {Lead: "II", RateHz: 500, StartS: 1e9, MV: []float64{1}}}},
	}
	for name, rec := range cases {
		if err := Write(&bytes.Buffer{}, rec, Options{}); err == nil || !strings.HasPrefix(err.Error(), "edf: ") {
			t.Errorf("%s: %v", name, err)
		}
	}
	dir := t.TempDir()
	if err := WriteFile(filepath.Join(dir, "x.edf"), cases["rate"], Options{}); err == nil {
		t.Error("WriteFile accepted a bad record")
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("left %v", ents)
	}
}

func TestReadErrors(t *testing.T) {
	t.Parallel()
	rec := ptb12(t, 2)
	var buf bytes.Buffer
	if err := Write(&buf, rec, Options{}); err != nil {
		t.Fatal(err)
	}
	good := buf.Bytes()
	mod := func(off int, s string) []byte {
		b := append([]byte(nil), good...)
		copy(b[off:], s)
		return b
	}
	cases := map[string][]byte{
		"short":     good[:100],
		"version":   mod(0, "1       "),
		"ns":        mod(252, "9999"),
		"hdrbytes":  mod(184, "256     "),
		"truncated": good[:len(good)-10],
		"edf+d":     mod(192, "EDF+D"),
		"digital":   mod(256+13*120, "40000   "),
	}
	for name, b := range cases {
		if _, _, err := Read(bytes.NewReader(b)); err == nil || !strings.HasPrefix(err.Error(), "edf: ") {
			t.Errorf("%s: %v", name, err)
		}
	}
}

func BenchmarkWrite12x10s(b *testing.B) {
	rec := ptb12(b, 10)
	b.ReportAllocs()
	for b.Loop() {
		Write(&bytes.Buffer{}, rec, Options{})
	}
}
