package compare

import (
	"math"
	"testing"

	"tracelift/record"
	"tracelift/record/wfdb"
)

// Einthoven's law (II = I + III, common practice) holds on a real
// 12-lead record (PTB s0010_re, ../shared/data) and breaks when two of
// its limb leads are swapped, as a misread layout would.
func TestEinthovenMisfit(t *testing.T) {
	rec, err := wfdb.ReadRecord("../../shared/data/ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Skipf("PTB record not here: %v", err)
	}
	rec = rec.Window(record.Standard12, 500, 0, 10)
	rel, ok := einthovenMisfit(rec)
	if !ok || rel > 0.1 {
		t.Fatalf("real record: residual %.3f (ok %v), want under 0.1", rel, ok)
	}
	I, II := rec.Lead("I"), rec.Lead("II")
	I.MV, II.MV = II.MV, I.MV
	if rel, ok := einthovenMisfit(rec); !ok || rel <= einthovenBroken {
		t.Fatalf("I and II swapped: residual %.3f (ok %v), want over %.2f", rel, ok, einthovenBroken)
	}
}

// A heart whose frontal axis is near -30° draws lead II nearly flat (II =
// I + III with III close to -I, common practice). A digitization error of
// 5 % of lead I's size in each limb lead (about what a fax reading leaves)
// must not read as a broken law: it is many times II's own spread, but a
// small share of the limb leads'. Swapping I and II still breaks it.
func TestEinthovenMisfitFlatII(t *testing.T) {
	const n, rate = 5000, 500.0
	mk := func(lead string, f func(k int) float64) record.Signal {
		s := record.Signal{Lead: lead, RateHz: rate, MV: make([]float64, n)}
		for k := range s.MV {
			s.MV[k] = f(k)
		}
		return s
	}
	wave := func(k int) float64 { return math.Sin(2*math.Pi*float64(k)/400) + 0.3*math.Sin(2*math.Pi*float64(k)/37) }
	noise := func(seed int) func(k int) float64 {
		return func(k int) float64 { return 0.05 * math.Sin(float64(k*(7+seed))*1.618+float64(seed)) }
	}
	I := mk("I", func(k int) float64 { return wave(k) + noise(1)(k) })
	III := mk("III", func(k int) float64 { return -0.95*wave(k) + noise(2)(k) })
	II := mk("II", func(k int) float64 { return 0.05*wave(k) + noise(3)(k) })
	rec := &record.Record{Signals: []record.Signal{I, II, III}}
	if rel, ok := einthovenMisfit(rec); !ok || rel > einthovenBroken {
		t.Errorf("flat II with 5 %% noise: residual %.2f (ok %v), want at most %.2f", rel, ok, einthovenBroken)
	}
	rec.Signals[0].MV, rec.Signals[1].MV = rec.Signals[1].MV, rec.Signals[0].MV
	if rel, ok := einthovenMisfit(rec); !ok || rel <= einthovenBroken {
		t.Errorf("I and II swapped: residual %.2f (ok %v), want over %.2f", rel, ok, einthovenBroken)
	}
}
