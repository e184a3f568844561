package batch

import (
	"bytes"
	"math"
	"testing"
)

// FuzzSummaryRoundTrip: any file name, error text and numbers survive a
// write and a read of the summary CSV (RFC 4180 quoting).
func FuzzSummaryRoundTrip(f *testing.F) {
	f.Add("ward 1/p,1.png", "calib: \"x\"\nline 2", 72.5, "V3/V4")
	f.Add("", "", math.NaN(), "")
	f.Fuzz(func(t *testing.T, file, msg string, hr float64, tr string) {
		in := NoFindings()
		in.HeartRateBPM, in.Transition = hr, tr
		rows := []Row{{File: file, Status: StatusFailed, Error: msg, Findings: in, Seconds: 1}}
		var buf bytes.Buffer
		if err := WriteSummary(&buf, rows); err != nil {
			t.Fatal(err)
		}
		back, err := ReadSummary(&buf)
		if err != nil {
			t.Fatalf("reading back: %v\n%q", err, buf.String())
		}
		if len(back) != 1 {
			t.Fatalf("%d rows back", len(back))
		}
		// encoding/csv turns \r\n inside quoted fields into \n (RFC 4180
		// leaves line breaks to the reader), so compare without \r.
		norm := func(s string) string { return string(bytes.ReplaceAll([]byte(s), []byte("\r"), nil)) }
		b := back[0]
		if norm(b.File) != norm(file) || norm(b.Error) != norm(msg) || norm(b.Findings.Transition) != norm(tr) {
			t.Errorf("round trip changed %q %q %q into %q %q %q", file, msg, tr, b.File, b.Error, b.Findings.Transition)
		}
		want := parseNum(formatNum(hr))
		if got := b.Findings.HeartRateBPM; !(got == want || math.IsNaN(got) && math.IsNaN(want)) {
			t.Errorf("rate %v came back as %v", hr, got)
		}
	})
}

// FuzzParseDocument: any bytes give a document or an error, never a panic.
func FuzzParseDocument(f *testing.F) {
	f.Add([]byte(`{"image_sha256":"ab","heart_rate_bpm":60,"quality":{"I":{"confidence":0.5}},"transition":"V3"}`))
	f.Add([]byte(`{"image_sha256":"ab","intervals_ms":{"pr":"x"},"axis":[]}`))
	f.Fuzz(func(t *testing.T, b []byte) {
		sha, _, err := ParseDocument(b)
		if err == nil && sha == "" {
			t.Error("accepted a document without a hash")
		}
	})
}
