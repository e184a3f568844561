package pipeline

import (
	"context"
	"encoding/json"
	"os"
	"strings"
	"testing"

	"tracelift/calib"
	"tracelift/samples"
	"tracelift/samples/dipole"
)

func demoByName(t *testing.T, part string) samples.DemoFile {
	t.Helper()
	for _, d := range samples.Demo() {
		if strings.Contains(d.Name, part) {
			return d
		}
	}
	t.Fatalf("no demo printout named like %q", part)
	return samples.DemoFile{}
}

func runDemo(t *testing.T, d samples.DemoFile, opt Options) *Outcome {
	t.Helper()
	pg, err := calib.Decode(d.Data, d.Name, calib.LoadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	o, err := ProcessPage(context.Background(), pg, opt)
	if err != nil {
		t.Fatal(err)
	}
	return o
}

// withheld checks that a page not to be read shows no flags and no
// categories, and that its JSON says so at the top level.
func withheld(t *testing.T, o *Outcome) {
	t.Helper()
	if f := o.Findings; f != nil && (len(f.Flags) > 0 || f.Axis.QRSCategory != "" || f.TransitionCl != "" || len(f.Borderline) > 0) {
		t.Errorf("a page not to be read shows flags %v, axis category %q, transition class %q", f.Flags, f.Axis.QRSCategory, f.TransitionCl)
	}
	b, err := json.Marshal(o)
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Verdict string   `json:"verdict"`
		Reasons []Reason `json:"verdict_reasons"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Verdict != "not_readable" || len(doc.Reasons) == 0 || doc.Reasons[0].Do == "" {
		t.Errorf("JSON verdict %q with reasons %+v", doc.Verdict, doc.Reasons)
	}
	if br := o.Brief(); !strings.HasPrefix(br, "verdict    This page is not to be read.") || strings.Contains(br, "flag ") {
		t.Errorf("the summary does not lead with the verdict, or shows flags:\n%s", br)
	}
}

// The clean demo printout was drawn by our renderer in the standard 3x4+1
// layout and order (its truth file says so): it is ready to read.
func TestVerdictCleanDemoReady(t *testing.T) {
	o := runDemo(t, demoByName(t, "clean"), Options{})
	if o.Verdict.Level != Ready {
		t.Errorf("clean demo: %s, reasons %+v", o.Verdict.Level, o.Verdict.Reasons)
	}
	if !strings.HasPrefix(o.Brief(), "verdict    This page is ready to read.") {
		t.Errorf("summary:\n%s", o.Brief())
	}
	// Each measurement carries its 90 % interval beside it in the JSON,
	// holding the value.
	b, err := json.Marshal(o)
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Verdict   string     `json:"verdict"`
		HR        float64    `json:"heart_rate_bpm"`
		HRCI      [2]float64 `json:"heart_rate_bpm_ci90"`
		Intervals map[string]any
		Axis      struct {
			QRS   float64    `json:"qrs_deg"`
			QRSCI [2]float64 `json:"qrs_deg_ci90"`
		} `json:"axis"`
		IntervalsMS map[string]json.RawMessage `json:"intervals_ms"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Verdict != "ready" || !(doc.HRCI[0] < doc.HR && doc.HR < doc.HRCI[1]) || !(doc.Axis.QRSCI[0] < doc.Axis.QRS && doc.Axis.QRS < doc.Axis.QRSCI[1]) {
		t.Errorf("JSON verdict %q, rate %v in %v, axis %v in %v", doc.Verdict, doc.HR, doc.HRCI, doc.Axis.QRS, doc.Axis.QRSCI)
	}
	for _, k := range []string{"pr_ci90", "qrs_ci90", "qt_ci90", "qtc_bazett_ci90"} {
		if _, ok := doc.IntervalsMS[k]; !ok {
			t.Errorf("intervals_ms has no %s", k)
		}
	}
}

// The demo fax is a standard-order 3x4+1 page (its truth file). Read in
// Cabrera's order, its limb leads carry the wrong names and break
// Einthoven's law (I + III = II, Einthoven 1913): the page is not to be
// read, and says to give the layout and order.
func TestVerdictFaxMisreadNotReadable(t *testing.T) {
	opt := Options{}
	opt.Digitize.LeadOrder = "cabrera"
	o := runDemo(t, demoByName(t, "fax"), opt)
	if o.Verdict.Level != NotReadable {
		t.Fatalf("fax read in the wrong lead order: %s, reasons %+v", o.Verdict.Level, o.Verdict.Reasons)
	}
	withheld(t, o)
}

// outside05 is a fax drawn by an outside renderer in the 3x4+1 layout
// (its truth file, outside05.json); when it is read in another layout it
// is not to be read.
func TestVerdictOutsideFax(t *testing.T) {
	const path = "../../shared/data/outside-printouts/outside05.png"
	if _, err := os.Stat(path); err != nil {
		t.Skip("outside printouts not present")
	}
	var truth struct {
		Layout string `json:"layout"`
	}
	b, err := os.ReadFile("../../shared/data/outside-printouts/outside05.json")
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &truth); err != nil {
		t.Fatal(err)
	}
	o, err := Process(context.Background(), path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("outside05: read as %s (truth %s), verdict %s %+v", o.Digitized.Layout, truth.Layout, o.Verdict.Level, o.Verdict.Reasons)
	// The outside renderer writes the rhythm strip as "+R" (its README).
	want := strings.Replace(truth.Layout, "+R", "+1", 1)
	if o.Digitized.Layout == want {
		if o.Verdict.Level == NotReadable {
			t.Errorf("layout read right, yet not to be read: %+v", o.Verdict.Reasons)
		}
		return
	}
	if o.Verdict.Level != NotReadable {
		t.Errorf("layout misread as %s (truth %s), verdict %s", o.Digitized.Layout, want, o.Verdict.Level)
	}
	withheld(t, o)
}

// A page whose pulse is narrower than the common 200 ms and that prints
// no settings cannot tell its paper speed: a 2.5 mm pulse is 200 ms at
// 12.5 mm/s or 100 ms at 25 mm/s, a 4 mm one is 200 ms at no standard
// speed. The reading takes 25 mm/s, the speed 12-lead pages run at
// (common practice), and the verdict says the speed was assumed.
func TestVerdictSpeedAssumed(t *testing.T) {
	for _, ms := range []float64{100, 160} {
		st := samples.DefaultStyle()
		st.PulseMS, st.DPI = ms, 200
		st.Header, st.Labels = "", false
		p, err := samples.Render(dipole.Generate(dipole.Params{Seed: 5, DurationS: 10}), st)
		if err != nil {
			t.Fatal(err)
		}
		o, err := ProcessPage(context.Background(), &calib.Page{Image: p.Image}, Options{})
		if err != nil {
			t.Fatal(err)
		}
		found := false
		for _, r := range o.Verdict.Reasons {
			found = found || r.Code == "speed_assumed"
		}
		if o.Calib.SpeedMMPerS != 25 || !found {
			t.Errorf("%g ms pulse: %g mm/s, reasons %+v; want 25 mm/s and speed_assumed", ms, o.Calib.SpeedMMPerS, o.Verdict.Reasons)
		}
	}
}
