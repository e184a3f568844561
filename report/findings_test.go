package report

import (
	"fmt"
	"math"
	"os/exec"
	"strings"
	"testing"

	"tracelift/axis"
	"tracelift/record"
)

// TestMeasuredNumbersPrinted measures the open PTB record s0010_re with
// the measurement engine, prints the summary, and reads the page back with
// poppler's pdftotext: the heart rate, the QRS axis and the caution must
// be there as the engine gave them.
func TestMeasuredNumbersPrinted(t *testing.T) {
	bin := needTool(t, "pdftotext")
	full := readPTB(t)
	// The first 10 s of the twelve standard leads.
	rec := &record.Record{Name: full.Name}
	for _, l := range record.Standard12 {
		s := full.Lead(l)
		if s == nil {
			t.Fatalf("PTB record lacks lead %s", l)
		}
		c := s.Clone()
		c.MV = c.MV[:int(10*c.RateHz)]
		rec.Signals = append(rec.Signals, c)
	}
	f, err := axis.Measure(rec, axis.Options{})
	if err != nil {
		t.Fatalf("axis.Measure: %v", err)
	}
	if !f.HeartRateBPM.OK() || !f.Axis.QRSDeg.OK() {
		t.Fatalf("the engine measured no rate or QRS axis on s0010_re: %+v", f)
	}
	s := &Summary{Record: rec, Caution: cautionText}
	s.AddFindings(f)
	path := renderTo(t, s, "letter")
	out, err := exec.Command(bin, "-layout", path, "-").Output()
	if err != nil {
		t.Fatalf("pdftotext: %v", err)
	}
	txt := strings.Join(strings.Fields(string(out)), " ")
	// The ± printed is half the engine's 90 % interval.
	val, pm := FormatValue(float64(f.HeartRateBPM), float64(f.HeartRateCI90[1]-f.HeartRateCI90[0])/2, 0)
	hr := val
	if pm != "" {
		hr += " ± " + pm
	}
	qrs := fmt.Sprintf("%+.0f°", math.Round(float64(f.Axis.QRSDeg)))
	if qrs == "+0°" || qrs == "-0°" {
		qrs = "0°"
	}
	t.Logf("engine: heart rate %s bpm, QRS axis %s", hr, qrs)
	for _, want := range []string{"Heart rate", hr + " bpm", "QRS " + qrs, cautionText} {
		if !strings.Contains(txt, want) {
			t.Errorf("pdftotext output lacks %q\n%s", want, txt)
		}
	}
}
