package coverage

import (
	"bytes"
	"math"
	"os"
	"testing"

	"tracelift/axis"

	"tracelift/record/wfdb"
)

// The stated 90 % intervals must hold the true value in 85 to 97 % of
// cases, pooled over the rate, PR, QRS, QT, QTc and QRS axis, and each
// measurement in at least 75 % of its cases (a loose floor: about 14
// cases each, where 11 of 14 is already 79 %). The truth is outside the
// pipeline: the dipole generator's own rate, intervals and axis
// (samples/dipole), and for the real record (PTB s0010_re, drawn in
// every fourth case) the measurement engine's reading of the signals that
// were drawn. The pages are cases of the bench suite of seed 3, which the
// picture model was not fitted on (seed 1). A small sample: the bench
// run (`tracelift-cli coverage --cases 100 --seed 2`) gives the table.
// The intervals restated from the recorded shares (Restate, which
// refitting from a CSV relies on) must be the ones the pipeline stated.
func TestCoverageOnRenderedPages(t *testing.T) {
	if testing.Short() {
		t.Skip("renders and digitizes pages")
	}
	real, err := wfdb.ReadRecord("../../shared/data/ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	conds := []string{"clean", "rotated", "photocopy", "photo", "fax"}
	var log bytes.Buffer
	cases := Run(3, 0, 16, conds, real, nil, &log)
	var tb bytes.Buffer
	Table(&tb, cases, conds)
	t.Logf("\n%s\n%s", log.String(), tb.String())
	var all Coverage
	for name, cv := range Tally(cases, Readable) {
		all.N += cv.N
		all.Held += cv.Held
		if s := cv.Share(); cv.N < 8 || s < 0.75 {
			t.Errorf("%s: coverage %.1f %% of %d intervals, want at least 75 %% of at least 8", name, 100*s, cv.N)
		}
	}
	if all.N < 30 {
		t.Fatalf("only %d intervals checked", all.N)
	}
	if s := all.Share(); s < 0.85 || s > 0.97 {
		t.Errorf("pooled coverage %.1f %% of %d intervals, want 85-97 %%", 100*s, all.N)
	}
	re := Restate(cases, axis.DefaultPictureModel)
	for i, c := range cases {
		for name, m := range c.Meas {
			r := re[i].Meas[name]
			if math.Abs(r.Lo-m.Lo) > 1e-6*(1+math.Abs(m.Lo)) || math.Abs(r.Hi-m.Hi) > 1e-6*(1+math.Abs(m.Hi)) {
				t.Errorf("case %d %s: restated [%.4f, %.4f], stated [%.4f, %.4f]", c.N, name, r.Lo, r.Hi, m.Lo, m.Hi)
			}
		}
	}
}

// The six outside pages (drawn by a renderer not ours, truth beside each)
// are a check, not a target: the table is logged, and a page read in the
// wrong layout must be marked not to be read (TestVerdictOutsideFax in
// pipeline holds that).
func TestCoverageOutsidePages(t *testing.T) {
	const dir = "../../shared/data/outside-printouts"
	if testing.Short() {
		t.Skip("digitizes six pages")
	}
	if _, err := os.Stat(dir); err != nil {
		t.Skip("outside printouts not present")
	}
	cases, err := Outside(dir)
	if err != nil {
		t.Fatal(err)
	}
	var tb bytes.Buffer
	Table(&tb, cases, []string{"clean", "phone", "fax"})
	t.Logf("\n%s", tb.String())
	if len(cases) != 6 {
		t.Errorf("%d outside pages read, want 6", len(cases))
	}
}
