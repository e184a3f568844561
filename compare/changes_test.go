package compare

import (
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
