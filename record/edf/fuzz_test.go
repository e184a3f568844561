package edf

import (
	"bytes"
	"math"
	"strings"
	"testing"

	"tracelift/record"
)

// FuzzRead: no panic or hang on any input; a file Read accepts is written
// again and read back with the same leads, starts, lengths, values within
// half a quantization step of the new file, and the same annotations.
func FuzzRead(f *testing.F) {
	rec := ptb12(f, 2)
	rec.Signals = rec.Signals[:3]
	rec.Signals[1].StartS = 0.5
	rec.Signals[1].MV = rec.Signals[1].MV[:1000]
	rec.Annotations = []record.Annotation{{TS: 0.2, Code: "N"}, {TS: 1.5, Code: "note", Text: "look here"}}
	var buf bytes.Buffer
	if err := Write(&buf, rec, Options{}); err != nil {
		f.Fatal(err)
	}
	f.Add(buf.Bytes())
	small := &record.Record{Signals: []record.Signal{{Lead: "II", RateHz: 4, MV: []float64{0, 1, math.NaN(), -2, 3}}}}
	buf.Reset()
	if err := Write(&buf, small, Options{}); err != nil {
		f.Fatal(err)
	}
	f.Add(buf.Bytes())
	f.Fuzz(func(t *testing.T, b []byte) {
		r1, a1, err := Read(bytes.NewReader(b))
		if err != nil {
			if !strings.HasPrefix(err.Error(), "edf: ") {
				t.Fatalf("unprefixed error %v", err)
			}
			return
		}
		for _, s := range r1.Signals {
			n := s.Lead
			if len(n) > 16 || (len(n) > 12 && hasTypePrefix(n)) || strings.ContainsFunc(n, func(r rune) bool { return r < 32 || r > 126 }) {
				return // labels of 16 printable ASCII bytes cannot carry it
			}
		}
		var out bytes.Buffer
		if err := Write(&out, r1, Options{}); err != nil {
			msg := err.Error()
			if strings.Contains(msg, "whole samples") || strings.Contains(msg, "does not fit") ||
				strings.Contains(msg, "more than") || strings.Contains(msg, "share the label") {
				return // legitimately not writable as EDF+ by this writer
			}
			t.Fatalf("Write of a record Read accepted: %v", err)
		}
		r2, a2, err := Read(bytes.NewReader(out.Bytes()))
		if err != nil {
			t.Fatalf("re-read: %v", err)
		}
		if len(r2.Signals) != len(r1.Signals) {
			t.Fatalf("%v then %v", r1.Leads(), r2.Leads())
		}
		raw := out.Bytes()
		ns := len(r2.Signals) + 1
		for i, s2 := range r2.Signals {
			s1 := r1.Signals[i]
			if s1.Lead != s2.Lead || s1.Len() != s2.Len() || math.Abs(s1.StartS-s2.StartS) > 1e-6+0.5/s1.RateHz ||
				math.Abs(s1.RateHz-s2.RateHz) > 1e-9*s1.RateHz {
				t.Fatalf("%s %d %v %v, then %s %d %v %v", s1.Lead, s1.Len(), s1.StartS, s1.RateHz, s2.Lead, s2.Len(), s2.StartS, s2.RateHz)
			}
			q := step(t, raw, ns, i)
			for k := range s1.MV {
				v, w := s1.MV[k], s2.MV[k]
				if math.IsNaN(v) != math.IsNaN(w) || math.Abs(v-w) > q/2+1e-9*math.Abs(v) {
					t.Fatalf("%s[%d] %v then %v (step %g)", s1.Lead, k, v, w, q)
				}
			}
		}
		for _, a := range a1 {
			if strings.ContainsFunc(a.Text+a.Code, func(r rune) bool { return r < 32 }) || math.Abs(a.TS) > 1e9 {
				return
			}
		}
		if len(a1) != len(a2) {
			t.Fatalf("%d annotations, then %d", len(a1), len(a2))
		}
		// Write sorts by time (stably); compare as a sorted list.
		b1 := append([]record.Annotation(nil), a1...)
		sortAnns(b1)
		for i := range b1 {
			x, y := b1[i], a2[i]
			if x.Code != y.Code || x.Text != y.Text || math.Abs(x.TS-y.TS) > 1e-6 {
				t.Fatalf("annotation %d: %+v then %+v", i, x, y)
			}
		}
	})
}

func sortAnns(a []record.Annotation) {
	for i := 1; i < len(a); i++ {
		for j := i; j > 0 && a[j].TS < a[j-1].TS; j-- {
			a[j], a[j-1] = a[j-1], a[j]
		}
	}
}
