package axis

import (
	"math"
	"testing"

	"tracelift/samples/dipole"
)

// Each measurement's picture error grows with the facts of the page its
// weights name, and only with those: a scale taken from the sheet's size
// widens the QRS duration's interval under a model that weighs it, and
// leaves PR's alone when PR's weights do not. The sizes in the test's
// model are invented for the check; the arithmetic is the model's own
// (1 + Σ weight × fact, then √(spread² + picture²) × 1.645).
func TestPageFactsWidenOnlyWhatTheyWeigh(t *testing.T) {
	t.Parallel()
	rec := dipole.Generate(dipole.Params{DurationS: 8, NoiseMV: 0.01, Seed: 3})
	model := PictureModel{HRPercent: 1, PRMS: 4, QRSMS: 4, QTMS: 4, QRSAreaMVMS: 1,
		QRS: PageWeights{ScaleGuessed: 2}, HR: PageWeights{PulseAssumed: 1}}
	grid := Picture{Digitized: true, ScaleSource: "grid", ScaleConfidence: 0.9, Model: &model}
	page := grid
	page.ScaleSource, page.PulseAssumed = "page", true
	a, err := Measure(rec, Options{Picture: grid})
	if err != nil {
		t.Fatal(err)
	}
	b, err := Measure(rec, Options{Picture: page})
	if err != nil {
		t.Fatal(err)
	}
	for name, want := range map[string]float64{"qrs": 3, "heart_rate_bpm": 2, "pr": 1, "qt": 1, "qrs_deg": 1} {
		pa, pb := float64(a.PictureSD[name]), float64(b.PictureSD[name])
		if !(pa > 0) || math.Abs(pb/pa-want) > 1e-9 {
			t.Errorf("%s: picture SD %.4g on the page-scaled page, %.4g on the grid page: ratio %.4g, want %g", name, pb, pa, pb/pa, want)
		}
		if u := float64(a.PictureUnitSD[name]); !(u > 0) {
			t.Errorf("%s: unit SD %v", name, u)
		}
	}
	if wa, wb := a.IntervalsMS.QRSCI90[1]-a.IntervalsMS.QRSCI90[0], b.IntervalsMS.QRSCI90[1]-b.IntervalsMS.QRSCI90[0]; !(wb > wa) {
		t.Errorf("QRS interval %.2f ms wide on the page-scaled page, %.2f on the grid page", wb, wa)
	}
	if wa, wb := a.IntervalsMS.PRCI90[1]-a.IntervalsMS.PRCI90[0], b.IntervalsMS.PRCI90[1]-b.IntervalsMS.PRCI90[0]; wa != wb {
		t.Errorf("PR interval %.2f ms wide on the page-scaled page, %.2f on the grid page", wb, wa)
	}
	// A record read from a file has no picture error at all.
	if k := (Picture{ScaleSource: "page", PulseAssumed: true}).Factor("qrs", 0.2, Doubts{TimeRatio: 0.5}); k != 0 {
		t.Errorf("factor %v for a record not digitized", k)
	}
}

// A page whose QRS (200 ms) and QT (760 ms) at 40 bpm are a normal
// heart's at twice the paper speed read has its intervals stretched to
// hold the readings at the other speed: QRS 100 ms, rate 80 bpm, QTc
// times √0.5 (Bazett: QT·r / √(RR·r)). Worked by hand.
func TestTimeScaleWidening(t *testing.T) {
	t.Parallel()
	if r := TimeScaleRatio(40, 200, 760); r != 0.5 {
		t.Fatalf("ratio %v, want 0.5", r)
	}
	if r := TimeScaleRatio(72, 100, 400); r != 1 {
		t.Fatalf("ratio %v for a normal beat, want 1", r)
	}
	if r := TimeScaleRatio(150, 45, 200); r != 2 {
		t.Fatalf("ratio %v for a halved beat, want 2", r)
	}
	for _, c := range []struct {
		name           string
		v, lo, hi      float64
		wantLo, wantHi float64
	}{
		{"qrs", 200, 190, 210, 95, 210},
		{"heart_rate_bpm", 40, 38, 42, 38, 84},
		{"qtc_bazett", 600, 590, 610, 600*math.Sqrt(0.5) - 10*math.Sqrt(0.5), 610},
		{"qrs_deg", 60, 50, 70, 50, 70},
	} {
		lo, hi := WidenForTimeScale(c.name, c.v, c.lo, c.hi, 0.5)
		if math.Abs(lo-c.wantLo) > 1e-9 || math.Abs(hi-c.wantHi) > 1e-9 {
			t.Errorf("%s: [%v, %v], want [%v, %v]", c.name, lo, hi, c.wantLo, c.wantHi)
		}
	}
}
