package wfdb

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"tracelift/record"
)

// The first words of 100.atr decoded by hand with encoding/binary: 0x7012
// is code 28 ('+', rhythm change) at sample 0x012 = 18, then 0xFC03 is AUX
// with 3 bytes "(N\x00" and a pad byte, then 0x043B is code 1 ('N') 0x3B =
// 59 samples later (sample 77), then 0x0525 code 1 at 77+0x125 = 370.
func TestAnnotationsFirstWords(t *testing.T) {
	t.Parallel()
	raw, err := os.ReadFile(shared + "mitdb-100/100.atr")
	if err != nil {
		t.Fatal(err)
	}
	w := func(i int) uint16 { return binary.LittleEndian.Uint16(raw[2*i:]) }
	if w(0) != 0x7012 || w(1) != 0xFC03 || string(raw[4:6]) != "(N" || w(4) != 0x043B || w(5) != 0x0525 {
		t.Fatalf("file does not start as decoded by hand: % x", raw[:12])
	}
	anns, err := ReadAnnotations(shared + "mitdb-100/100.atr")
	if err != nil {
		t.Fatal(err)
	}
	want := []Annotation{{Sample: 18, Code: 28, Aux: "(N"}, {Sample: 77, Code: 1}, {Sample: 370, Code: 1}}
	if !reflect.DeepEqual(anns[:3], want) {
		t.Fatalf("first annotations %+v", anns[:3])
	}
}

// An independent decoder (a few lines of Python over the same MIT format
// description) counts annotations per code and reports the last sample;
// our reader must agree exactly. The MIT-BIH Arrhythmia Database's table
// of beats lists 2273 beats for record 100 (2239 N, 33 A, 1 V; from
// memory). Every sample lies within the header's 650000 samples.
func TestAnnotations100(t *testing.T) {
	t.Parallel()
	path := shared + "mitdb-100/100.atr"
	anns, err := ReadAnnotations(path)
	if err != nil {
		t.Fatal(err)
	}
	counts := map[int]int{}
	beats := 0
	for _, a := range anns {
		counts[a.Code]++
		if IsBeat(a.Code) {
			beats++
		}
		if a.Sample < 0 || a.Sample >= 650000 {
			t.Fatalf("annotation at sample %d outside the record", a.Sample)
		}
	}
	if beats != 2273 || counts[1] != 2239 || counts[8] != 33 || counts[5] != 1 {
		t.Fatalf("%d beats, %v", beats, counts)
	}
	py := "/usr/bin/python3"
	if _, err := os.Stat(py); err != nil {
		t.Skip("python3 not installed")
	}
	script := `
import struct, sys, collections
b = open(sys.argv[1], "rb").read()
i, t, c, last = 0, 0, collections.Counter(), 0
while i + 1 < len(b):
    (w,) = struct.unpack_from("<H", b, i); i += 2
    a, d = w >> 10, w & 1023
    if w == 0: break
    if a == 59:
        hi, lo = struct.unpack_from("<HH", b, i); i += 4
        t += struct.unpack("<i", struct.pack("<I", (hi << 16) | lo))[0]
    elif a == 63: i += d + (d & 1)
    elif a in (60, 61, 62): pass
    else:
        t += d; c[a] += 1; last = t
print(last, " ".join("%d:%d" % kv for kv in sorted(c.items())))
`
	out, err := exec.Command(py, "-c", script, path).Output()
	if err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	fmt.Fprint(&b, anns[len(anns)-1].Sample)
	b.WriteString(" ")
	var parts []string
	for code := 0; code < 64; code++ {
		if n := counts[code]; n > 0 {
			parts = append(parts, fmt.Sprintf("%d:%d", code, n))
		}
	}
	b.WriteString(strings.Join(parts, " "))
	if got := strings.TrimSpace(string(out)); got != b.String() {
		t.Fatalf("python decoder %q, ours %q", got, b.String())
	}
}

// Re-encoding the annotations of 100.atr reproduces the PhysioNet file
// byte for byte (same SKIP, AUX and padding rules as the WFDB library).
func TestAnnotationsReencode(t *testing.T) {
	t.Parallel()
	raw, err := os.ReadFile(shared + "mitdb-100/100.atr")
	if err != nil {
		t.Fatal(err)
	}
	anns, err := DecodeAnnotations(bytes.NewReader(raw))
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := EncodeAnnotations(&buf, anns); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(buf.Bytes(), raw) {
		n := 0
		for n < len(raw) && n < buf.Len() && raw[n] == buf.Bytes()[n] {
			n++
		}
		t.Fatalf("re-encoded file differs at byte %d (len %d vs %d)", n, buf.Len(), len(raw))
	}
}

// Long gaps (SKIP), subtype, chan, num and odd/even aux text survive a
// write and a read.
func TestAnnotationsRoundTrip(t *testing.T) {
	t.Parallel()
	in := []Annotation{
		{Sample: 0, Code: 28, Aux: "(AFIB"},
		{Sample: 1023, Code: 1},
		{Sample: 1024 + 1023, Code: 5, Sub: 3, Chan: 1},
		{Sample: 5_000_000, Code: 1, Chan: 1, Num: 7},
		{Sample: 5_000_000, Code: Note, Chan: 1, Num: 7, Aux: "ab"},
		{Sample: 5_000_001, Code: 14},
	}
	p := filepath.Join(t.TempDir(), "x.atr")
	if err := WriteAnnotations(p, in); err != nil {
		t.Fatal(err)
	}
	got, err := ReadAnnotations(p)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, in) {
		t.Fatalf("got %+v", got)
	}
	bad := [][]Annotation{{{Code: 0}}, {{Code: 50}}, {{Code: 1, Sample: -1}}, {{Code: 1, Sub: 2000}}, {{Code: 1, Aux: strings.Repeat("x", 255)}}, {{Code: 1, Aux: "a\x00b"}}, {{Code: 1, Sample: 1 << 40}}}
	for _, b := range bad {
		if err := EncodeAnnotations(&bytes.Buffer{}, b); err == nil {
			t.Errorf("%+v accepted", b)
		}
	}
	for _, b := range [][]byte{{0x03}, {0x00, 0xEC, 0x01}, {0x03, 0xFC, 'a'}} {
		if _, err := DecodeAnnotations(bytes.NewReader(b)); err == nil {
			t.Errorf("truncated % x accepted", b)
		}
	}
}

// Record annotations travel through WriteRecord: beats keep their
// mnemonic, a free note becomes a NOTE with its text.
func TestRecordAnnotations(t *testing.T) {
	t.Parallel()
	rec := ptb12(t, 2)
	rec.Annotations = []record.Annotation{{TS: 0.5, Code: "N"}, {TS: 1.25, Code: "note", Text: "check V1 here"}}
	dir := t.TempDir()
	if err := WriteRecord(dir, "r", rec); err != nil {
		t.Fatal(err)
	}
	anns, err := ReadAnnotations(filepath.Join(dir, "r.atr"))
	if err != nil {
		t.Fatal(err)
	}
	got := ToRecord(anns, 1000)
	want := []record.Annotation{{TS: 0.5, Code: "N"}, {TS: 1.25, Code: "\"", Text: "note: check V1 here"}}
	if !reflect.DeepEqual(got, want) {
		t.Fatalf("%+v", got)
	}
}
