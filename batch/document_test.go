package batch

import (
	"encoding/json"
	"math"
	"strings"
	"testing"
)

func TestParseDocument(t *testing.T) {
	t.Parallel()
	if _, _, err := ParseDocument([]byte("not json")); err == nil || !strings.HasPrefix(err.Error(), "batch: ") {
		t.Errorf("bad JSON: %v", err)
	}
	if _, _, err := ParseDocument([]byte(`{"heart_rate_bpm": 60}`)); err == nil {
		t.Error("a document without image_sha256 was accepted")
	}
	// A null rate stays unmeasured; the median of two confidences is
	// their mean; a missing interval is unmeasured, not zero.
	sha, f, err := ParseDocument([]byte(`{"image_sha256":"ab","heart_rate_bpm":null,"intervals_ms":{"pr":150},
		"quality":{"V1":{"confidence":0.5},"V2":{"confidence":0.7}},"transition":"V4"}`))
	if err != nil || sha != "ab" || !math.IsNaN(f.HeartRateBPM) || f.MedianLeadConfidence != 0.6 || f.Transition != "V4" ||
		f.PRMS != 150 || !math.IsNaN(f.QTMS) {
		t.Errorf("got %q %+v %v", sha, f, err)
	}
	b, err := json.Marshal(f)
	if err != nil || !strings.Contains(string(b), `"heart_rate_bpm":null`) {
		t.Errorf("NaN marshals as %s, %v", b, err)
	}
	// A page traced but not measured says so in the summary's error cell.
	_, f, _ = ParseDocument([]byte(`{"image_sha256":"ab","measure_error":"axis: no beats found"}`))
	if row := (Result{File: "x", Status: StatusOK, Findings: &f}).Row(); row.Error != "not measured: axis: no beats found" {
		t.Errorf("row error %q", row.Error)
	}
}

// A page's JSON document holds each interval beside its 90 % interval
// (pr, pr_ci90: [lo, hi]) and a top-level verdict; both are read.
func TestParseDocumentIntervalsAndVerdict(t *testing.T) {
	t.Parallel()
	doc := `{"image_sha256":"ab","heart_rate_bpm":70,"verdict":"care","intervals_ms":{"pr":160,"pr_ci90":[150,170],"qrs":90,"qrs_ci90":[null,null]},"axis":{"qrs_deg":45,"qrs_deg_ci90":[40,50]}}`
	sha, f, err := ParseDocument([]byte(doc))
	if err != nil || sha != "ab" || f.PRMS != 160 || f.QRSMS != 90 || f.QRSAxisDeg != 45 || f.Verdict != "care" {
		t.Fatalf("sha %q findings %+v, %v", sha, f, err)
	}
}
