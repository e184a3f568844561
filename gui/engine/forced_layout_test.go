package engine

import (
	"context"
	"math"
	"strings"
	"testing"

	"tracelift/gui/model"
	"tracelift/samples"
)

// TestForced3x4KeepsBoxesOnTheirLeads forces 3x4 on the clean demo page
// (printed 3x4+1: three lead rows and a lead II strip below, the demo's
// truth): every lead's box must sit where the page's own reading puts that
// lead, so corrections saved for a lead are drawn on its panel (a redrawn
// stretch of V2 stays on V2's row).
func TestForced3x4KeepsBoxesOnTheirLeads(t *testing.T) {
	if testing.Short() {
		t.Skip("reads a 300-dpi page twice")
	}
	src, _ := Demo()
	read := func(l string) *model.Analysis {
		a, err := (&Backend{}).Analyze(context.Background(), src, model.Settings{Layout: l}, nil)
		if err != nil {
			t.Fatal(err)
		}
		return a
	}
	auto, forced := read(""), read("3x4")
	at := map[string][4]float64{}
	for _, p := range auto.Panels {
		if !p.Rhythm {
			at[p.Lead] = p.Box
		}
	}
	if len(forced.Panels) != 12 {
		t.Fatalf("%d panels forced 3x4, want 12", len(forced.Panels))
	}
	for _, p := range forced.Panels {
		b, ok := at[p.Lead]
		if !ok || math.Abs((p.Box[1]+p.Box[3])/2-(b[1]+b[3])/2) > (b[3]-b[1])/4 || math.Abs((p.Box[0]+p.Box[2])/2-(b[0]+b[2])/2) > (b[2]-b[0])/4 {
			t.Errorf("%s forced at %.0f, read at %.0f", p.Lead, p.Box, b)
		}
	}
}

// Forcing 3x4 on the 6x2 demo page (northfield, printed 6x2 in Cabrera
// order: samples' demo truth) reads it as asked but says in the reading's
// note and in the findings' reasons that the page shows six rows, so the
// status does not show boxes as if they fitted.
func TestForced3x4On6x2PageWarns(t *testing.T) {
	if testing.Short() {
		t.Skip("reads a demo page")
	}
	var src model.Source
	for _, d := range samples.Demo() {
		if d.Name == "northfield_6x2_cabrera_200dpi.jpg" {
			src = model.Source{Name: d.Name, Data: d.Data}
		}
	}
	if src.Data == nil {
		t.Fatal("no 6x2 demo page")
	}
	b := &Backend{}
	for _, l := range []string{"3x4", ""} {
		a, err := b.Analyze(context.Background(), src, model.Settings{Layout: l}, nil)
		if err != nil {
			t.Fatal(err)
		}
		m := model.New(b)
		if err := m.Install(src, a, model.Settings{Layout: l}, nil, ""); err != nil {
			t.Fatal(err)
		}
		if l == "" {
			if a.LayoutNote != "" || a.Layout != "6x2" {
				t.Fatalf("found %s with note %q", a.Layout, a.LayoutNote)
			}
			continue
		}
		if !strings.Contains(a.LayoutNote, "6 rows") || !strings.Contains(a.LayoutNote, "named wrongly") {
			t.Fatalf("forced 3x4 on 6x2: note %q", a.LayoutNote)
		}
		if s := m.Summary(); s == nil || s.VerdictLevel == "ready" || !strings.Contains(strings.Join(s.VerdictReasons, "\n"), "6 rows") {
			t.Fatalf("forced 3x4 on 6x2: verdict %+v", s)
		}
	}
}
