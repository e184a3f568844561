package coverage

import (
	"bytes"
	"math"
	"reflect"
	"testing"

	"tracelift/axis"
	"tracelift/pipeline"
)

// A table written and read back keeps every case, its page's facts and
// its measurements, so the model can be refitted from it; and restating
// it under the model it was measured with changes no interval. The cases
// are invented for the check.
func TestCSVKeepsPageFacts(t *testing.T) {
	pic := axis.Picture{Digitized: true, ScaleSource: "page", ScaleConfidence: 0.25, LawResidualUV: 42.5,
		PulseAssumed: true, TimeZeroUnsure: true, FaintShare: 0.25, GappyShare: 1.0 / 12, Bilevel: true}
	model := axis.DefaultPictureModel
	m := Meas{Est: 96, Truth: 92, Exact: 93, EngineSD: 1.5, Unit: 1}
	c := Case{N: 7, Condition: "fax", Source: "dipole", Layout: "3x4+1", Verdict: pipeline.Care, Reasons: []string{"scale_guessed", "no_pulse"},
		Page: pic, MeanConf: 0.71, Doubts: axis.Doubts{TimeRatio: 0.5}, Meas: map[string]Meas{"qrs": m}, GeneratorAxisDeg: math.NaN()}
	m.Lo, m.Hi = bounds("qrs", m, c, model)
	if !(m.Lo < m.Est/2 && m.Hi > m.Est) {
		t.Fatalf("interval [%v, %v] of a page whose time scale is in doubt does not hold half the value read, %v", m.Lo, m.Hi, m.Est/2)
	}
	m.PictureSD = pic.Factor("qrs", c.MeanConf, c.Doubts) * model.QRSMS
	c.Meas["qrs"] = m
	failed := Case{N: 8, Condition: "rotated", Err: "no grid", Verdict: pipeline.NotReadable, GeneratorAxisDeg: math.NaN()}
	var b bytes.Buffer
	if err := WriteCSV(&b, []Case{c, failed}); err != nil {
		t.Fatal(err)
	}
	back, err := ReadCSV(&b)
	if err != nil {
		t.Fatal(err)
	}
	if len(back) != 2 {
		t.Fatalf("%d cases read back, want 2", len(back))
	}
	got := back[0]
	if !reflect.DeepEqual(got.Page, pic) || got.MeanConf != c.MeanConf || got.Doubts != c.Doubts || !reflect.DeepEqual(got.Meas, c.Meas) || !reflect.DeepEqual(got.Reasons, c.Reasons) {
		t.Errorf("read back %+v\nwant %+v", got, c)
	}
	if back[1].Page.Digitized || back[1].Err != "no grid" || len(back[1].Meas) != 0 {
		t.Errorf("failed case read back as %+v", back[1])
	}
	re := Restate(back, model)[0].Meas["qrs"]
	if math.Abs(re.Lo-m.Lo) > 1e-9 || math.Abs(re.Hi-m.Hi) > 1e-9 || math.Abs(re.PictureSD-m.PictureSD) > 1e-9 {
		t.Errorf("restated [%v, %v] sd %v, want [%v, %v] sd %v", re.Lo, re.Hi, re.PictureSD, m.Lo, m.Hi, m.PictureSD)
	}
	if _, err := ReadCSV(bytes.NewBufferString("case,condition\n1,clean\n")); err == nil {
		t.Error("a table of another header was read")
	}
}
