package pipeline

import (
	"context"
	"os"
	"testing"

	"tracelift/record"
	"tracelift/samples"
	"tracelift/stats"
)

// outsideDir holds printouts drawn by a renderer that is not ours, with
// their truth (../shared/data/outside-printouts/README.md).
const outsideDir = "../../shared/data/outside-printouts"

// The floors each outside page is held to: the median per-lead SNR in dB
// scored the way that folder's README asks (record.CompareRecordStrict:
// blanks count as error, a lead not recovered 0 dB, best shift within
// ±40 ms in 2 ms steps). They stand up to about 1.5 dB under where the tracer
// lands today, so that a change that loses ground on pictures we did not
// draw turns this test red; they are to be raised as the tracer improves,
// never lowered to let a change through. The goals (issue 15) are 20 dB
// for clean pages and 12 dB for photos and faxes; pages still short of
// them are named in failing.
var outsideFloors = map[string]float64{
	"outside01": 16.5, // clean 200 dpi 3x4+1, pulse joined (lands 18.0; goal 20)
	"outside02": 20.5, // clean 300 dpi 6x2, pulse joined (lands 22.2)
	"outside03": 13,   // clean lone strip on strip paper, 59 mm tall (lands 14.1)
	"outside04": 16,   // phone photo of a lone strip at a steep slant (lands 17.5)
	"outside05": 6.5,  // fax 3x4+1 whose grid shows only its 5 mm lines, binarised, salt noise (lands 8.1; goal 12)
	"outside06": 12,   // phone photo 3x4+1, pulse joined (lands 13.1)
}

// failing are the outside pages the tracer does not read yet: what goes
// wrong is said beside each, and the test fails if one starts reading so
// that its floor gets set.
var failing = map[string]string{}

func TestOutsidePrintouts(t *testing.T) {
	if testing.Short() {
		t.Skip("digitizes six pages")
	}
	if _, err := os.Stat(outsideDir); err != nil {
		t.Skipf("outside printouts not here: %v", err)
	}
	pages, err := samples.ReadOutsideDir(outsideDir)
	if err != nil {
		t.Fatal(err)
	}
	if len(pages) != 6 {
		t.Fatalf("%d outside pages, want 6", len(pages))
	}
	for _, p := range pages {
		o, err := Process(context.Background(), p.Image, Options{})
		var est *record.Record
		if err == nil {
			est = o.Digitized.Record
		}
		var snr []float64
		for _, a := range record.CompareRecordStrict(p.Truth, est) {
			snr = append(snr, a.SNRdB)
		}
		med := stats.Median(snr)
		t.Logf("%s (%s, %s): median per-lead SNR %.1f dB over %d leads (err %v)", p.Name, p.Condition, p.Layout, med, len(snr), err)
		if floor, ok := outsideFloors[p.Name]; ok {
			if err != nil {
				t.Errorf("%s: %v", p.Name, err)
			} else if !(med >= floor) {
				t.Errorf("%s: median per-lead SNR %.1f dB, under its floor of %.1f dB", p.Name, med, floor)
			}
			continue
		}
		why, ok := failing[p.Name]
		if !ok {
			t.Errorf("%s: no floor set for this page", p.Name)
			continue
		}
		if med >= 10 {
			t.Errorf("%s now reads at %.1f dB (was: %s): give it a floor", p.Name, med, why)
		}
	}
}
