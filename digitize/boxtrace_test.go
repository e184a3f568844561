package digitize

import (
	"errors"
	"math"
	"testing"

	"tracelift/samples"
)

// TestBoxTracerFollowsPanels traces every panel of a rendered 3x4+1 page
// (dipole seed 5, the renderer's truth calibration) inside the box Run
// gave it: the trace must follow Run's own to within a pixel over the
// columns both traced, and its baseline Run's to within a pixel. A box on
// blank paper, a box under 2 mm and a box that is not finite are refused.
func TestBoxTracerFollowsPanels(t *testing.T) {
	st := samples.DefaultStyle()
	st.Layout = samples.Layout3x4R1
	p := render(t, dipoleRecord(5), st)
	cal := truthCal(p)
	res := runOn(t, cal, Options{})
	bt, err := NewBoxTracer(cal)
	if err != nil {
		t.Fatal(err)
	}
	for _, tr := range res.Traces {
		pn := res.Panels[tr.Panel]
		got, base, err := bt.Trace(pn.Box)
		if err != nil {
			t.Fatalf("%s: %v", pn.Lead, err)
		}
		if math.Abs(base-pn.BaselineY) > 1 {
			t.Errorf("%s: baseline %.1f, Run's %.1f", pn.Lead, base, pn.BaselineY)
		}
		var sum float64
		n := 0
		for k, y := range got.Y {
			j := got.X0 + k - tr.X0
			if j < 0 || j >= len(tr.Y) || math.IsNaN(y) || math.IsNaN(tr.Y[j]) {
				continue
			}
			sum += math.Abs(y - tr.Y[j])
			n++
		}
		if n < len(tr.Y)*8/10 || sum/float64(n) > 1 {
			t.Errorf("%s: %d of %d columns in common, mean difference %.2f px", pn.Lead, n, len(tr.Y), sum/float64(max(n, 1)))
		}
	}
	mm := cal.PxPerMM
	if _, _, err := bt.Trace([4]float64{2, 2, 2 + 10*mm, 2 + 10*mm}); !errors.Is(err, ErrNoTraceInBox) {
		t.Errorf("blank corner: %v", err)
	}
	b := res.Panels[0].Box
	if _, _, err := bt.Trace([4]float64{b[0], b[1], b[0] + mm, b[3]}); err == nil {
		t.Error("a box 1 mm wide was traced")
	}
	if _, _, err := bt.Trace([4]float64{b[0], math.NaN(), b[2], b[3]}); err == nil {
		t.Error("a box with NaN was traced")
	}
}
