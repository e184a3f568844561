package wfdb

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"

	"tracelift/record"
)

func addFile(f *testing.F, path string, limit int) {
	b, err := os.ReadFile(path)
	if err != nil {
		f.Fatal(err)
	}
	if limit > 0 && len(b) > limit {
		b = b[:limit]
	}
	f.Add(b)
}

// FuzzParseHeader: no panic or hang; an accepted header, written again
// with FormatHeader, parses to the same signal specs.
func FuzzParseHeader(f *testing.F) {
	addFile(f, shared+"ptb-s0010_re/s0010_re.hea", 0)
	addFile(f, shared+"mitdb-100/100.hea", 0)
	addFile(f, shared+"wfdb-test01_00s/test01_00s.hea", 0)
	f.Add([]byte("x 2 360/1.5(0) 10\nx.dat 212:3+512 200(1024)/uV 12 0 0 0 0 a b\nx.dat 212\n"))
	f.Fuzz(func(t *testing.T, b []byte) {
		h, err := ParseHeader(bytes.NewReader(b))
		if err != nil {
			if !strings.HasPrefix(err.Error(), "wfdb: ") {
				t.Fatalf("unprefixed error %v", err)
			}
			return
		}
		if len(h.Signals) != h.NSig {
			t.Fatalf("%d signals, %d declared", len(h.Signals), h.NSig)
		}
		// FormatHeader writes the fields we write; only compare headers
		// whose fields survive a rewrite (no skew, offsets or block sizes,
		// units and descriptions without spaces to collapse).
		for _, s := range h.Signals {
			if s.SkewSamples != 0 || s.ByteOffset != 0 || s.Units == "" || strings.ContainsAny(s.Units, " ()/") ||
				s.Description != strings.Join(strings.Fields(s.Description), " ") || math.IsInf(s.Gain, 0) {
				return
			}
		}
		var buf bytes.Buffer
		if err := FormatHeader(&buf, h); err != nil {
			t.Fatal(err)
		}
		h2, err := ParseHeader(&buf)
		if err != nil {
			t.Fatalf("rewritten header refused: %v\n%s", err, buf.String())
		}
		for i := range h.Signals {
			a, c := h.Signals[i], h2.Signals[i]
			a.HasChecksum, c.HasChecksum = true, true
			if !reflect.DeepEqual(a, c) {
				t.Fatalf("signal %d: %+v, then %+v", i, a, c)
			}
		}
	})
}

// FuzzDecodeSignals: every format and up to three signals, never a panic;
// the frame count matches the bytes.
func FuzzDecodeSignals(f *testing.F) {
	addFile(f, shared+"wfdb-test01_00s/test01_00s.dat", 4096)
	addFile(f, shared+"mitdb-100/100.dat", 4096)
	f.Add([]byte{0x00, 0x80, 0xff, 0x7f, 0x01})
	f.Fuzz(func(t *testing.T, b []byte) {
		if len(b) == 0 {
			return
		}
		fm := []int{16, 212, 80}[int(b[0])%3]
		n := 1 + int(b[0]/3)%3
		nsamp := int(b[0] / 9 % 4)
		specs := make([]SignalSpec, n)
		for i := range specs {
			specs[i] = SignalSpec{Format: fm, Gain: 200}
		}
		cols, err := DecodeSignals(bytes.NewReader(b[1:]), specs, nsamp)
		if err != nil {
			return
		}
		if len(cols) != n {
			t.Fatalf("%d columns for %d signals", len(cols), n)
		}
		if nsamp > 0 && len(cols[0]) != nsamp {
			t.Fatalf("%d frames, %d asked", len(cols[0]), nsamp)
		}
		if fm == 16 && nsamp == 0 && len(cols[0]) != (len(b)-1)/2/n {
			t.Fatalf("%d frames from %d bytes", len(cols[0]), len(b)-1)
		}
	})
}

// FuzzDecodeAnnotations: no panic or hang; whatever decodes re-encodes
// and decodes to the same annotations (when the codes and fields are ones
// the writer accepts).
func FuzzDecodeAnnotations(f *testing.F) {
	addFile(f, shared+"mitdb-100/100.atr", 0)
	f.Add([]byte{0x00, 0xec, 0x00, 0x00, 0x10, 0x00, 0x00, 0x04, 0x03, 0xf8, 0x02, 0xf0, 0x05, 0xfc, 'h', 'i', '!', 0, 0, 0})
	// A skip back in time: two annotations decoded out of time order.
	f.Add([]byte{0x00, 0xec, 0x30, 0x30, 0x60, 0x30, 0x00, 0x30, 0x00, 0xec, 0x30, 0xf8, 0x60, 0x30, 0x00, 0x30, 0x00, 0x00})
	f.Fuzz(func(t *testing.T, b []byte) {
		a, err := DecodeAnnotations(bytes.NewReader(b))
		if err != nil {
			return
		}
		for _, x := range a {
			if x.Code < 1 || x.Code > 49 || len(x.Aux) > 254 || x.Sample < 0 {
				return
			}
			if x.Sample > math.MaxInt32 {
				return
			}
		}
		// Bytes can decode out of time order (a skip back); the writer
		// puts annotations in time order, as annotation files hold them.
		sort.SliceStable(a, func(i, j int) bool { return a[i].Sample < a[j].Sample })
		for i := 1; i < len(a); i++ {
			if a[i].Sample-a[i-1].Sample > math.MaxInt32 {
				return
			}
		}
		var buf bytes.Buffer
		if err := EncodeAnnotations(&buf, a); err != nil {
			t.Fatalf("re-encode: %v", err)
		}
		a2, err := DecodeAnnotations(&buf)
		if err != nil {
			t.Fatalf("re-decode: %v", err)
		}
		if len(a) == 0 && len(a2) == 0 {
			return
		}
		if !reflect.DeepEqual(a, a2) {
			t.Fatalf("%+v\nthen %+v", a, a2)
		}
	})
}

// FuzzWriteRecord: a record built from the bytes (1 to 3 leads, values of
// any scale, gaps) is written, read and written again; the second files
// equal the first byte for byte and the values agree within half a step.
func FuzzWriteRecord(f *testing.F) {
	f.Add([]byte{1, 0, 0x10, 0x20, 0xff, 0x7f, 0x00, 0x80, 0x55, 0x01})
	f.Add([]byte{7, 2, 0xff, 0xff, 0x01, 0x00, 0x34, 0x12, 0x00, 0x80})
	f.Fuzz(func(t *testing.T, b []byte) {
		if len(b) < 4 || len(b) > 4096 {
			return
		}
		n := 1 + int(b[0])%3
		scale := math.Pow(10, float64(int(b[1])%12)-4) // 1e-4 to 1e7 mV per unit
		rec := &record.Record{}
		for i := 0; i < n; i++ {
			rec.Signals = append(rec.Signals, record.Signal{Lead: fmt.Sprintf("L%d", i), RateHz: 250})
		}
		for k := 2; k+1 < len(b); k += 2 {
			v := int16(binary.LittleEndian.Uint16(b[k:]))
			x := float64(v) * scale / 32768 * 3.3 // not on any gain's grid
			if v == math.MinInt16 {
				x = math.NaN()
			}
			s := &rec.Signals[(k/2)%n]
			s.MV = append(s.MV, x)
		}
		dir := t.TempDir()
		if err := WriteRecord(dir, "a", rec); err != nil {
			if strings.Contains(err.Error(), "do not fit") {
				return
			}
			t.Fatal(err)
		}
		got, err := ReadRecord(filepath.Join(dir, "a"))
		if err != nil {
			t.Fatal(err)
		}
		h, err := ReadHeaderFile(filepath.Join(dir, "a.hea"))
		if err != nil {
			t.Fatal(err)
		}
		for i, s := range rec.Signals {
			g := got.Signals[i]
			for k, v := range s.MV {
				w := g.MV[k]
				if math.IsNaN(v) != math.IsNaN(w) || math.Abs(v-w) > 0.5/h.Signals[i].Gain*(1+1e-9) {
					t.Fatalf("%s[%d] %v read as %v (gain %v)", s.Lead, k, v, w, h.Signals[i].Gain)
				}
			}
		}
		if err := WriteRecord(dir, "b", got); err != nil {
			t.Fatal(err)
		}
		a1, _ := os.ReadFile(filepath.Join(dir, "a.dat"))
		b1, _ := os.ReadFile(filepath.Join(dir, "b.dat"))
		ah, _ := os.ReadFile(filepath.Join(dir, "a.hea"))
		bh, _ := os.ReadFile(filepath.Join(dir, "b.hea"))
		ah = bytes.ReplaceAll(bytes.Replace(ah, []byte("a "), []byte("b "), 1), []byte("a.dat"), []byte("b.dat"))
		if !bytes.Equal(a1, b1) || !bytes.Equal(ah, bh) {
			t.Fatalf("second write differs:\n%s\n%s", ah, bh)
		}
	})
}
