package engine

import (
	"context"
	"math"
	"testing"

	"tracelift/gui/model"
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
