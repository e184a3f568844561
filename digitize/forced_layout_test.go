package digitize

import (
	"context"
	"errors"
	"strings"
	"testing"

	"tracelift/samples"
)

// TestForcedLayoutMatchesPage forces the layout the page was printed in:
// the result must carry every panel of that layout (12 lead panels plus the
// rhythm strips the layout names), in as many rows as the layout has. The
// panel counts are the layouts' definitions (record.Layout, common practice
// for 12-lead printouts).
func TestForcedLayoutMatchesPage(t *testing.T) {
	for _, c := range []struct {
		lay    samples.Layout
		panels int
		rows   int
	}{
		{samples.Layout6x2, 12, 6},
		{samples.Layout3x4R1, 13, 4},
	} {
		t.Run(string(c.lay), func(t *testing.T) {
			st := samples.DefaultStyle()
			st.Layout = c.lay
			p := render(t, dipoleRecord(3), st)
			res := runOn(t, truthCal(p), Options{Layout: string(c.lay)})
			if string(res.Layout) != string(c.lay) {
				t.Fatalf("layout %q, forced %q", res.Layout, c.lay)
			}
			if len(res.Panels) != c.panels {
				t.Fatalf("%d panels, %s has %d", len(res.Panels), c.lay, c.panels)
			}
			rows := map[int]bool{}
			for _, pn := range res.Panels {
				rows[pn.Row] = true
			}
			if len(rows) != c.rows {
				t.Fatalf("panels in %d rows, %s has %d", len(rows), c.lay, c.rows)
			}
		})
	}
}

// TestForcedLayoutMisfitWords forces 6x2 (six rows, record.Layout) on a
// 3x4+1 page (four rows): the error stays ErrLayout for callers, names both
// row counts, and does not ask for the layout by hand, which was given.
func TestForcedLayoutMisfitWords(t *testing.T) {
	st := samples.DefaultStyle()
	st.Layout = samples.Layout3x4R1
	p := render(t, dipoleRecord(3), st)
	_, err := Run(context.Background(), truthCal(p), Options{Layout: "6x2"})
	if !errors.Is(err, ErrLayout) {
		t.Fatalf("err %v, want ErrLayout", err)
	}
	msg := err.Error()
	if strings.Contains(msg, "by hand") {
		t.Errorf("%q asks for the layout by hand, which was given", msg)
	}
	if !strings.Contains(msg, "4 rows") || !strings.Contains(msg, "6x2 has 6") {
		t.Errorf("%q does not name the 4 rows found and the 6 of 6x2", msg)
	}
}
