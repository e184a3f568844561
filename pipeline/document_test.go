package pipeline

import (
	"encoding/json"
	"math"
	"reflect"
	"regexp"
	"strings"
	"testing"

	"tracelift/axis"
	"tracelift/digitize"
)

// Every key of the JSON document is snake_case: the walk visits each
// struct type the document holds (map keys are data, lead names, and are
// not checked).
func TestDocumentKeysSnakeCase(t *testing.T) {
	t.Parallel()
	snake := regexp.MustCompile(`^[a-z][a-z0-9]*(_[a-z0-9]+)*$`)
	seen := map[reflect.Type]bool{}
	var walk func(typ reflect.Type, path string)
	walk = func(typ reflect.Type, path string) {
		switch typ.Kind() {
		case reflect.Pointer, reflect.Slice, reflect.Array, reflect.Map:
			walk(typ.Elem(), path)
			return
		case reflect.Struct:
		default:
			return
		}
		if seen[typ] {
			return
		}
		seen[typ] = true
		for i := 0; i < typ.NumField(); i++ {
			fd := typ.Field(i)
			if !fd.IsExported() {
				continue
			}
			tag := fd.Tag.Get("json")
			name, _, _ := strings.Cut(tag, ",")
			if name == "-" {
				continue
			}
			if !snake.MatchString(name) {
				t.Errorf("%s.%s (%s) is written as %q, not a snake_case key", path, fd.Name, typ, name)
			}
			walk(fd.Type, path+"."+name)
		}
	}
	walk(reflect.TypeOf(Document{}), "document")
	walk(reflect.TypeOf(axis.Findings{}), "findings")
	if !seen[reflect.TypeOf(digitize.Panel{})] || !seen[reflect.TypeOf(digitize.LawCheck{})] || !seen[reflect.TypeOf(digitize.Place{})] {
		t.Error("the walk missed the panels, the lead-law checks or the places to check")
	}
}

// A document written and read back keeps its panels, checks and findings;
// the findings' keys sit at the top level beside the document's.
func TestDocumentRoundTrip(t *testing.T) {
	t.Parallel()
	f := unmeasured()
	f.HeartRateBPM, f.IntervalsMS.QRS, f.Transition = 72, 94, "V3/V4"
	f.Leads = []axis.LeadMeasure{{Lead: "V2", Beats: 9, Quality: 0.8}}
	d := Document{
		ImageSHA256: "ab", Verdict: Care,
		Layout:   LayoutJSON{Name: "3x4+1", Panels: []digitize.Panel{{Lead: "II", Row: 3, Rhythm: true, T0S: 0, T1S: 10, BaselineY: 812}}},
		LeadLaws: []digitize.LawCheck{{Column: 1, T0S: 2.5, T1S: 5, EinthovenRMSuV: 12, GoldbergerRMSuV: [3]float64{8, -1, 9}, Worst: "III"}},
		Check:    []digitize.Place{{Lead: "V2", T0S: 6, T1S: 6.5, Why: "no trace found"}},
		Quality:  map[string]digitize.LeadQuality{"V2": {Confidence: 0.4}},
		Leads:    []string{"II", "V2"},
		Findings: f,
	}
	b, err := json.Marshal(d)
	if err != nil {
		t.Fatal(err)
	}
	for _, key := range []string{`"t0_s":2.5`, `"einthoven_rms_uv":12`, `"why":"no trace found"`, `"baseline_y":812`,
		`"heart_rate_bpm":72`, `"recorded_leads":["II","V2"]`, `"leads":[{"lead":"V2","beats":9`} {
		if !strings.Contains(string(b), key) {
			t.Errorf("the document lacks %s: %s", key, b)
		}
	}
	back, err := ParseDocument(b)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(back.Layout, d.Layout) || !reflect.DeepEqual(back.LeadLaws, d.LeadLaws) ||
		!reflect.DeepEqual(back.Check, d.Check) || !reflect.DeepEqual(back.Leads, d.Leads) || back.Verdict != Care {
		t.Errorf("read back %+v", back)
	}
	if back.Findings == nil || back.Findings.HeartRateBPM != 72 || back.Findings.IntervalsMS.QRS != 94 ||
		!math.IsNaN(float64(back.Findings.IntervalsMS.PR)) || back.Findings.Transition != "V3/V4" ||
		len(back.Findings.Leads) != 1 || back.Findings.Leads[0].Beats != 9 {
		t.Errorf("findings read back %+v", back.Findings)
	}
	// Without the findings' keys the document has none.
	d.Findings = nil
	b, _ = json.Marshal(d)
	if back, err := ParseDocument(b); err != nil || back.Findings != nil {
		t.Errorf("a document without findings read back %+v, %v", back, err)
	}
	if _, err := ParseDocument([]byte(`{"heart_rate_bpm":60}`)); err == nil {
		t.Error("a document without image_sha256 was accepted")
	}
}
