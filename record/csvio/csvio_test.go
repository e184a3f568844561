package csvio

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"tracelift/record"
	"tracelift/record/wfdb"
)

const shared = "../../../shared/data/"

// ptb12 reads the twelve standard leads of PTB record s0010_re (PTB
// Diagnostic ECG Database, PhysioNet), the first sec seconds.
func ptb12(t testing.TB, sec float64) *record.Record {
	t.Helper()
	rec, err := wfdb.ReadRecord(shared + "ptb-s0010_re/s0010_re")
	if err != nil {
		t.Fatal(err)
	}
	out := &record.Record{Name: rec.Name}
	for _, l := range record.Standard12 {
		s := rec.Lead(l)
		if s == nil {
			t.Fatalf("lead %s missing", l)
		}
		c := s.Clone()
		c.MV = c.MV[:int(sec*c.RateHz)]
		out.Signals = append(out.Signals, c)
	}
	return out
}

// The contract header (DEVELOPERS.md, command-line contract) and a write
// at the record's own rate reproduce the WFDB samples within the %.4f
// rounding (half of 0.1 µV).
func TestRoundTripPTB(t *testing.T) {
	t.Parallel()
	rec := ptb12(t, 10)
	var buf bytes.Buffer
	if err := Write(&buf, rec, 1000); err != nil {
		t.Fatal(err)
	}
	first, _, _ := strings.Cut(buf.String(), "\n")
	if first != "time_s,I,II,III,aVR,aVL,aVF,V1,V2,V3,V4,V5,V6" {
		t.Fatalf("header %q", first)
	}
	got, err := Read(&buf)
	if err != nil {
		t.Fatal(err)
	}
	if len(got.Signals) != 12 {
		t.Fatalf("%d leads", len(got.Signals))
	}
	for i, s := range got.Signals {
		ref := rec.Signals[i]
		if s.Lead != ref.Lead || s.RateHz != 1000 || s.StartS != 0 || s.Len() != ref.Len() {
			t.Fatalf("lead %s rate %v start %v len %d; want %s 1000 0 %d", s.Lead, s.RateHz, s.StartS, s.Len(), ref.Lead, ref.Len())
		}
		for k, v := range s.MV {
			if math.Abs(v-ref.MV[k]) > 0.00005+1e-12 {
				t.Fatalf("%s[%d] = %v, source %v", s.Lead, k, v, ref.MV[k])
			}
		}
	}
}

// Python's csv module (an independent reader, RFC 4180) parses the file
// to the same row count, columns and column sums.
func TestPythonReadsIt(t *testing.T) {
	t.Parallel()
	py := "/usr/bin/python3"
	if _, err := os.Stat(py); err != nil {
		t.Skip("python3 not installed")
	}
	rec := ptb12(t, 2)
	rec.Signals = append(rec.Signals, record.Signal{Lead: `rhythm, "II"`, RateHz: 1000, MV: rec.Signals[1].MV})
	p := filepath.Join(t.TempDir(), "a.csv")
	var buf bytes.Buffer
	if err := Write(&buf, rec, 500); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(p, buf.Bytes(), 0o644)
	script := `
import csv, sys
rows = list(csv.reader(open(sys.argv[1], newline='')))
print(len(rows) - 1)
print("|".join(rows[0]))
for j in range(1, len(rows[0])):
    print("%.4f" % sum(float(r[j]) for r in rows[1:] if r[j] != ""))
`
	out, err := exec.Command(py, "-c", script, p).Output()
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(string(out)), "\n")
	if lines[0] != "1000" {
		t.Fatalf("python counts %s rows, want 1000 (2 s at 500 Hz)", lines[0])
	}
	if want := "time_s|I|II|III|aVR|aVL|aVF|V1|V2|V3|V4|V5|V6|" + `rhythm, "II"`; lines[1] != want {
		t.Fatalf("python header %q", lines[1])
	}
	for j, s := range rec.Signals {
		var sum float64
		for k := 0; k < s.Len(); k += 2 { // 500 Hz rows fall on every other 1000 Hz sample
			sum += math.Round(s.MV[k]*1e4) / 1e4
		}
		got, _ := strconv.ParseFloat(lines[2+j], 64)
		if math.Abs(got-sum) > 1e-6*float64(s.Len()) {
			t.Fatalf("%s: python sum %v, want %v", s.Lead, got, sum)
		}
	}
}

// Resampling 360 Hz (MIT-BIH record 100) to 500 Hz against numpy.interp
// (linear interpolation, an independent implementation).
func TestResampleAgainstNumpy(t *testing.T) {
	t.Parallel()
	py := "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import numpy").Run(); err != nil {
		t.Skip("python3 with numpy not available")
	}
	rec, err := wfdb.ReadRecord(shared + "mitdb-100/100")
	if err != nil {
		t.Fatal(err)
	}
	for i := range rec.Signals {
		rec.Signals[i].MV = rec.Signals[i].MV[:3600] // 10 s
	}
	dir := t.TempDir()
	var a, b bytes.Buffer
	if err := Write(&a, rec, 360); err != nil {
		t.Fatal(err)
	}
	if err := Write(&b, rec, 500); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(dir, "src.csv"), a.Bytes(), 0o644)
	os.WriteFile(filepath.Join(dir, "out.csv"), b.Bytes(), 0o644)
	script := `
import numpy as np, sys
src = np.genfromtxt(sys.argv[1], delimiter=',', skip_header=1)
out = np.genfromtxt(sys.argv[2], delimiter=',', skip_header=1)
# columns: time_s, I..V6 (V5 is column 11), MLII (last)
worst = 0.0
for j in (11, 13):
    ref = np.interp(out[:, 0], src[:, 0], src[:, j], right=np.nan)
    ok = ~np.isnan(out[:, j])
    worst = max(worst, float(np.max(np.abs(ref[ok] - out[ok, j]))))
print(out.shape[0], worst)
`
	o, err := exec.Command(py, "-c", script, filepath.Join(dir, "src.csv"), filepath.Join(dir, "out.csv")).CombinedOutput()
	if err != nil {
		t.Fatalf("%v: %s", err, o)
	}
	var n int
	var worst float64
	fmt.Sscan(string(o), &n, &worst)
	// 3600 samples span 9.9972 s; the 500 Hz grid holds 4999 points in it.
	if n != 4999 {
		t.Fatalf("numpy counts %d rows, want 4999", n)
	}
	// Both sides are rounded to 0.1 µV; the reference interpolates rounded
	// values, so 1 µV covers rounding.
	if worst > 0.001 {
		t.Fatalf("worst difference from numpy.interp %.5f mV", worst)
	}
	got, err := Read(&b)
	if err != nil {
		t.Fatal(err)
	}
	if got.Signals[0].RateHz != 500 {
		t.Fatalf("rate %v", got.Signals[0].RateHz)
	}
}

// A 3×4 printout shows each lead for 2.5 s in its own column of time
// (common practice); cutting PTB leads that way, the CSV keeps each
// lead's start and leaves the rest of its column empty.
func TestStaggeredStarts(t *testing.T) {
	t.Parallel()
	src := ptb12(t, 10)
	rec := &record.Record{}
	for i, s := range src.Signals {
		col := i / 3
		a := int(float64(col) * 2.5 * s.RateHz)
		c := s.Clone()
		c.StartS = float64(col) * 2.5
		c.MV = c.MV[a : a+2500]
		rec.Signals = append(rec.Signals, c)
	}
	rec.Signals[0].MV[100] = math.NaN() // a gap
	var buf bytes.Buffer
	if err := Write(&buf, rec, 500); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(buf.String(), "\n")
	if len(lines) != 1+5000+1 { // header, 10 s at 500 Hz (last sample at 9.999 s), final newline
		t.Fatalf("%d lines", len(lines))
	}
	if f := strings.Split(lines[1], ","); f[0] != "0.000" || f[1] == "" || f[4] != "" {
		t.Fatalf("first row %q", lines[1])
	}
	got, err := Read(strings.NewReader(buf.String()))
	if err != nil {
		t.Fatal(err)
	}
	for i, s := range got.Signals {
		ref := rec.Signals[i]
		if s.Lead != ref.Lead || s.StartS != ref.StartS || s.Len() != 1250 || s.RateHz != 500 {
			t.Fatalf("%s: start %v len %d rate %v", s.Lead, s.StartS, s.Len(), s.RateHz)
		}
		for k, v := range s.MV {
			w := ref.MV[2*k]
			if math.IsNaN(w) != math.IsNaN(v) || math.Abs(v-w) > 0.00005+1e-12 {
				t.Fatalf("%s[%d] %v want %v", s.Lead, k, v, w)
			}
		}
	}
}

// A record with only non-standard leads gets no empty standard columns;
// a record with a single standard lead gets all twelve.
func TestColumns(t *testing.T) {
	t.Parallel()
	a := &record.Record{Signals: []record.Signal{{Lead: "MLII"}, {Lead: "rhythm"}}}
	if got := strings.Join(Columns(a), ","); got != "MLII,rhythm" {
		t.Fatal(got)
	}
	b := &record.Record{Signals: []record.Signal{{Lead: "MLII"}, {Lead: "V5"}}}
	if got := strings.Join(Columns(b), ","); got != "I,II,III,aVR,aVL,aVF,V1,V2,V3,V4,V5,V6,MLII" {
		t.Fatal(got)
	}
}

// The layout of PhysioNet's CSV sample export (header of quoted names,
// a units line, clock times 'm:ss.mmm'; from memory) read on the first
// second of MIT-BIH record 100.
func TestOtherShapes(t *testing.T) {
	t.Parallel()
	rec, err := wfdb.ReadRecord(shared + "mitdb-100/100")
	if err != nil {
		t.Fatal(err)
	}
	ml, v5 := rec.Signals[0].MV[:360], rec.Signals[1].MV[:360]
	var b strings.Builder
	b.WriteString("'Elapsed time','MLII','V5'\n'hh:mm:ss.mmm','mV','mV'\n")
	for k := range ml {
		ms := int(math.Round(float64(k) * 1000 / 360))
		fmt.Fprintf(&b, "'%d:%02d.%03d',%.3f,%.3f\n", ms/60000, ms/1000%60, ms%1000, ml[k], v5[k])
	}
	got, err := Read(strings.NewReader(b.String()))
	if err != nil {
		t.Fatal(err)
	}
	if got.Signals[0].Lead != "MLII" || got.Signals[0].RateHz != 360 || got.Signals[0].Len() != 360 {
		t.Fatalf("%+v", got.Signals[0].Lead)
	}
	if math.Abs(got.Signals[1].MV[200]-v5[200]) > 0.0005 {
		t.Fatal("V5 value")
	}

	// Semicolons, decimal commas, time in ms, values in µV.
	b.Reset()
	b.WriteString("time_ms;II (uV);V1 [uV]\n")
	for k := 0; k < 500; k++ {
		fmt.Fprintf(&b, "%d;%s;%s\n", 2*k, strings.Replace(fmt.Sprintf("%.1f", ml[k%360]*1000), ".", ",", 1), "")
	}
	got, err = Read(strings.NewReader(b.String()))
	if err != nil {
		t.Fatal(err)
	}
	if len(got.Signals) != 1 || got.Signals[0].Lead != "II" || got.Signals[0].RateHz != 500 {
		t.Fatalf("%v %v", got.Leads(), got.Signals[0].RateHz)
	}
	if math.Abs(got.Signals[0].MV[10]-ml[10]) > 0.0001 {
		t.Fatalf("µV scaling: %v want %v", got.Signals[0].MV[10], ml[10])
	}
}

func TestReadErrors(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name, in, want string
	}{
		{"empty", "", "csvio: empty file"},
		{"no time", "a,b\n1,2\n", "csvio: line 1: no time column"},
		{"one row", "time_s,I\n0,1\n", "at least two are needed"},
		{"bad value", "time_s,I\n0,1\n0.002,x\n", "csvio: line 3, column 2: bad value \"x\""},
		{"bad time", "time_s,I\n0,1\nabc,2\n", "csvio: line 3, column 1: bad time"},
		{"not increasing", "time_s,I\n0,1\n0,2\n", "line 3, column 1: time 0 s does not increase"},
		{"uneven", "time_s,I\n0,1\n0.002,1\n0.004,1\n0.010,1\n", "line 5, column 1: time step"},
		{"too many fields", "time_s,I\n0,1,5\n", "line 2: 3 fields"},
		{"dup lead", "time_s,II,ii\n", "lead II appears twice"},
		{"unit", "time_s,II (adu)\n", "unknown unit"},
		{"all empty", "time_s,II\n0,\n0.002,\n", "no lead holds a value"},
		{"inf", "time_s,II\n0,1e400\n", "column 2: bad value"},
		{"long line", "time_s,I\n" + strings.Repeat("1", MaxLineBytes+10), "line 2: line longer"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Read(strings.NewReader(c.in))
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("err %v, want %q", err, c.want)
			}
		})
	}
	var pe *ParseError
	_, err := Read(strings.NewReader("time_s,I\n0,1\n0.002,x\n"))
	if !errors.As(err, &pe) || pe.Line != 3 || pe.Column != 2 {
		t.Fatalf("%#v", err)
	}
}

func TestWriteErrors(t *testing.T) {
	t.Parallel()
	ok := &record.Record{Signals: []record.Signal{{Lead: "I", RateHz: 500, MV: []float64{1}}}}
	for _, r := range []float64{-1, math.NaN(), math.Inf(1)} {
		if err := Write(&bytes.Buffer{}, ok, r); err == nil {
			t.Fatalf("rate %v accepted", r)
		}
	}
	if err := Write(&bytes.Buffer{}, &record.Record{}, 500); err == nil || !strings.HasPrefix(err.Error(), "csvio: ") {
		t.Fatalf("empty record: %v", err)
	}
	far := &record.Record{Signals: []record.Signal{
		{Lead: "I", RateHz: 500, MV: []float64{1}},
		{Lead: "II", RateHz: 500, StartS: 1e9, MV: []float64{1}},
	}}
	if err := Write(&bytes.Buffer{}, far, 500); err == nil {
		t.Fatal("1e9 s of rows accepted")
	}
}

func BenchmarkWrite12x10s(b *testing.B) {
	rec := ptb12(b, 10)
	b.ReportAllocs()
	for b.Loop() {
		Write(&bytes.Buffer{}, rec, 500)
	}
}

func BenchmarkRead12x10s(b *testing.B) {
	rec := ptb12(b, 10)
	var buf bytes.Buffer
	Write(&buf, rec, 500)
	b.ReportAllocs()
	for b.Loop() {
		Read(bytes.NewReader(buf.Bytes()))
	}
}

func TestWriteFile(t *testing.T) {
	t.Parallel()
	p := filepath.Join(t.TempDir(), "a.csv")
	rec := ptb12(t, 1)
	if err := WriteFile(p, rec, 500); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	got, err := Read(f)
	if err != nil || len(got.Signals) != 12 || got.Signals[0].Len() != 500 {
		t.Fatalf("%v %v", err, got)
	}
	if err := WriteFile(p, &record.Record{}, 500); err == nil {
		t.Fatal("empty record written")
	}
	if b, _ := os.ReadFile(p); len(b) == 0 {
		t.Fatal("failed write clobbered the file")
	}
}
