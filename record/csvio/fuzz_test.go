package csvio

import (
	"bytes"
	"math"
	"strings"
	"testing"
)

// FuzzRead: Read never panics or hangs; whatever it accepts, Write
// writes and Read reads back with the same leads, rates, starts and
// values within the %.4f rounding (the round trip of encoding/csv's own
// fuzz target, applied to our layer).
func FuzzRead(f *testing.F) {
	rec := ptb12(f, 0.02)
	var buf bytes.Buffer
	if err := Write(&buf, rec, 500); err != nil {
		f.Fatal(err)
	}
	f.Add(buf.Bytes())
	f.Add([]byte("'Elapsed time','MLII','V5'\n'hh:mm:ss.mmm','mV','mV'\n'0:00.000',-0.145,-0.065\n'0:00.003',-0.145,-0.065\n'0:00.006',-0.145,-0.065\n"))
	f.Add([]byte("time_ms;II (uV);V1\n0;12,5;\n2;13,0;0,1\n4;;0,2\n"))
	f.Add([]byte("\xEF\xBB\xBFt,I,MLII\n# comment\n1.5,1,2\n1.6,NaN,3\n1.7,,\n1.8,4,\n"))
	f.Fuzz(func(t *testing.T, b []byte) {
		r1, err := Read(bytes.NewReader(b))
		if err != nil {
			return
		}
		rate := r1.Signals[0].RateHz
		if rate > 1e6 || r1.DurationS()*rate > 1e6 {
			return // valid, but too long to rewrite within a fuzz step
		}
		for _, s := range r1.Signals {
			if n := s.Lead; len(n) >= 2 && n[0] == '\'' && n[len(n)-1] == '\'' {
				return // Read strips one pair of single quotes per read
			}
			if n := s.Lead; strings.HasSuffix(n, ")") || strings.HasSuffix(n, "]") {
				return // Read takes a trailing bracket as the lead's unit, one per read
			}
		}
		onGrid := true // Write resamples leads that start between grid points
		for _, s := range r1.Signals {
			x := s.StartS * rate
			onGrid = onGrid && math.Abs(x-math.Round(x)) < 1e-6
		}
		if !onGrid {
			return
		}
		var out bytes.Buffer
		if err := Write(&out, r1, rate); err != nil {
			t.Fatalf("Write of a record Read accepted: %v", err)
		}
		if bytes.Count(out.Bytes(), []byte("\n")) < 3 {
			return // one row cannot carry a rate; Read rightly refuses it
		}
		r2, err := Read(bytes.NewReader(out.Bytes()))
		if err != nil {
			t.Fatalf("re-read: %v\n%s", err, out.Bytes())
		}
		if len(r2.Signals) != len(r1.Signals) {
			// Leads whose values all round to gaps cannot vanish: a value
			// is never written as empty. Lead order may change (standard
			// leads first), so compare by name.
			t.Fatalf("%d leads, then %d", len(r1.Signals), len(r2.Signals))
		}
		for _, s2 := range r2.Signals {
			s1 := r1.Lead(s2.Lead)
			if s1 == nil {
				t.Fatalf("lead %s appeared", s2.Lead)
			}
			if s1.Len() != s2.Len() || math.Abs(s1.StartS-s2.StartS) > 0.5/rate {
				t.Fatalf("%s: len %d start %v, then %d %v", s2.Lead, s1.Len(), s1.StartS, s2.Len(), s2.StartS)
			}
			if math.Abs(s2.RateHz-s1.RateHz) > 1e-6*s1.RateHz {
				t.Fatalf("rate %v then %v", s1.RateHz, s2.RateHz)
			}
			for k := range s1.MV {
				a, c := s1.MV[k], s2.MV[k]
				if math.IsNaN(a) != math.IsNaN(c) || math.Abs(a-c) > 0.00005+1e-9*math.Abs(a) {
					t.Fatalf("%s[%d] %v then %v", s2.Lead, k, a, c)
				}
			}
		}
	})
}
