package digitize

import (
	"context"
	"errors"
	"math"
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

// TestFitRowsKeepsLeadRowsAboveTheStrip: a 3x4+1 page forced to 3x4 (three
// rows, record.Layout) keeps the three lead rows and drops the rhythm strip
// below them (common practice: the strip is printed under the 3x4 grid),
// even when the strip's ink runs a pixel longer than the first row's, as
// on the clean demo page, where the longest-first rule dropped row one and
// named every row after the one below it.
func TestFitRowsKeepsLeadRowsAboveTheStrip(t *testing.T) {
	rows := []rowInfo{{base: 500, x0: 272, x1: 3224}, {base: 1050, x0: 272, x1: 3225}, {base: 1590, x0: 273, x1: 3225}, {base: 2130, x0: 272, x1: 3226}}
	got := fitRows(rows, 3)
	if len(got) != 3 || got[0].base != 500 || got[2].base != 1590 {
		t.Fatalf("kept %+v, want the three rows above the strip", got)
	}
	// A short row (a text line, a half-width strip) still gives way.
	rows[0].x1 = 1500
	got = fitRows(rows, 3)
	if len(got) != 3 || got[0].base != 1050 {
		t.Fatalf("kept %+v, want the short row dropped", got)
	}
}

// TestForced3x4OnStripPageKeepsLeads forces 3x4 on a rendered 3x4+1 page:
// each lead's box must lie on the same row as in the page's own reading.
func TestForced3x4OnStripPageKeepsLeads(t *testing.T) {
	st := samples.DefaultStyle()
	st.Layout = samples.Layout3x4R1
	p := render(t, dipoleRecord(3), st)
	auto := runOn(t, truthCal(p), Options{})
	forced := runOn(t, truthCal(p), Options{Layout: "3x4"})
	at := map[string]float64{}
	for _, pn := range auto.Panels {
		if !pn.Rhythm {
			at[pn.Lead] = (pn.Box[1] + pn.Box[3]) / 2
		}
	}
	for _, pn := range forced.Panels {
		y, ok := at[pn.Lead]
		c := (pn.Box[1] + pn.Box[3]) / 2
		if !ok || math.Abs(c-y) > (pn.Box[3]-pn.Box[1])/4 {
			t.Errorf("%s forced at y %.0f, read at %.0f", pn.Lead, c, y)
		}
	}
}

// TestForcedLayoutMisfitSaysSo forces layouts that do not match a
// rendered 6x2 page (six rows, limb leads left, record.Layout): 3x4 reads
// three of the six rows and 3x4+3, which has six rows too, names them
// after another grid. Both readings go ahead as asked, and both say in
// plain words (in Misfit and cal.Warnings) that the page shows something
// else; the page's own layout, forced or found, says nothing.
func TestForcedLayoutMisfitSaysSo(t *testing.T) {
	st := samples.DefaultStyle()
	st.Layout = samples.Layout6x2
	p := render(t, dipoleRecord(3), st)
	for _, c := range []struct {
		layout string
		words  []string // "" = no note
	}{
		{"3x4", []string{"6 rows", "3x4 reads 3", "the other 3 are left out", "named wrongly"}},
		{"3x4+3", []string{"far better read as 6x2", "named wrongly"}},
		{"6x2", nil},
		{"", nil},
	} {
		cal := truthCal(p)
		res, err := Run(context.Background(), cal, Options{Layout: c.layout})
		if err != nil {
			t.Fatalf("%q: %v", c.layout, err)
		}
		if len(c.words) == 0 {
			if res.Misfit != "" {
				t.Errorf("%q on its own page: %q", c.layout, res.Misfit)
			}
			continue
		}
		for _, w := range c.words {
			if !strings.Contains(res.Misfit, w) {
				t.Errorf("forced %s: %q lacks %q", c.layout, res.Misfit, w)
			}
		}
		if strings.Contains(res.Misfit, "digitize") || !strings.Contains(strings.Join(res.Warnings, "\n"), res.Misfit) {
			t.Errorf("forced %s: note %q, warnings %q", c.layout, res.Misfit, res.Warnings)
		}
	}
}
