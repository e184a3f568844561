package compare

import (
	"fmt"
	"math"
	"strings"
	"testing"

	"tracelift/axis"
	"tracelift/record"
	"tracelift/record/wfdb"
)

const shared = "../../shared/data/"

// ptb reads PTB s0010_re's twelve standard leads (PTB Diagnostic ECG
// Database, Bousseljot et al. 1995, PhysioNet).
func ptb(t testing.TB) *record.Record {
	t.Helper()
	rec, err := wfdb.ReadRecord(shared + "ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	out := &record.Record{Name: rec.Name}
	for _, l := range record.Standard12 {
		s := rec.Lead(l)
		if s == nil {
			t.Fatalf("PTB record lacks %s", l)
		}
		out.Signals = append(out.Signals, s.Clone())
	}
	return out
}

// window cuts [t0, t1) seconds out of every lead, the cut starting at 0.
func window(rec *record.Record, t0, t1 float64) *record.Record {
	out := &record.Record{Name: fmt.Sprintf("%s[%g,%g)", rec.Name, t0, t1)}
	for _, s := range rec.Signals {
		i0 := int(math.Round((t0 - s.StartS) * s.RateHz))
		i1 := int(math.Round((t1 - s.StartS) * s.RateHz))
		i0, i1 = max(i0, 0), min(i1, len(s.MV))
		out.Signals = append(out.Signals, record.Signal{Lead: s.Lead, RateHz: s.RateHz, MV: append([]float64(nil), s.MV[i0:i1]...)})
	}
	return out
}

func measure(t testing.TB, rec *record.Record) *axis.Findings {
	t.Helper()
	f, err := axis.Measure(rec, axis.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return f
}

// table writes the changes beyond their uncertainty (all with verbose).
func table(r *Result, all bool) string {
	var b strings.Builder
	if r.Exchange != nil {
		fmt.Fprintf(&b, "exchange: %s (%.2f -> %.2f)\n", r.Exchange.Text, r.Exchange.DistanceAsIs, r.Exchange.DistanceUndone)
	}
	for _, a := range r.Alignment {
		if all {
			fmt.Fprintf(&b, "align %-4s shift %+5.1f ms gain %.2f corr %.3f dist %.2f\n", a.Lead, a.ShiftMS, a.Gain, a.Corr, a.Distance)
		}
	}
	for _, c := range r.Changes {
		if all || c.Beyond {
			mark := " "
			if c.Raised {
				mark = "!"
			}
			fmt.Fprintf(&b, "%s %s [%s %s]\n", mark, c.Message, c.Kind, c.ExplainedBy)
		}
	}
	for _, n := range r.Notes {
		fmt.Fprintf(&b, "note: %s\n", n)
	}
	return b.String()
}

// raisedKeys lists the raised changes as "item" or "lead item".
func raisedKeys(r *Result) []string {
	var out []string
	for _, c := range r.RaisedChanges() {
		k := c.Item
		if c.Lead != "" {
			k = c.Lead + " " + c.Item
		}
		out = append(out, k)
	}
	return out
}
