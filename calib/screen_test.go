package calib

import (
	"fmt"
	"image"
	"image/color"
	"path/filepath"
	"testing"
	"time"

	"tracelift/record/wfdb"
	"tracelift/samples"
)

// The screen says yes to the ECG pages of the rendered suite (every
// layout and condition, a real PTB record among the dipole ones: the
// open record s0010_re in ../shared/data) and to the outside printouts,
// and no to cover sheets of text, rules and a table, drawn at fax and
// scanner resolutions, upright and turned a quarter.
func TestScreenFindsECGPages(t *testing.T) {
	real, err := wfdb.ReadRecord("../../shared/data/ptb-s0010_re/s0010_re.hea")
	if err != nil {
		t.Fatal(err)
	}
	conds := samples.Conditions
	n := 20
	if testing.Short() {
		n = 10
	}
	var slowest time.Duration
	missed := 0
	for i := 0; i < n; i++ {
		sc := samples.NewSuiteCase(5, i, conds, real)
		sc.Style.DPI = 200
		p, err := sc.Printout()
		if err != nil {
			t.Fatal(err)
		}
		t0 := time.Now()
		s := Screen(&Page{Image: p.Image})
		slowest = max(slowest, time.Since(t0))
		if !s.ECG {
			screen(&Page{Image: p.Image}, t.Logf)
			missed++
			t.Logf("MISSED case %d (%s, %s, grid %d): screened out: %s (trace width %.2f)", i, sc.Condition, sc.Style.Layout, sc.Style.Grid, s.Why, s.TraceWidth)
		} else {
			t.Logf("case %d (%s, %s, grid %d): %s (trace %.2f, grid %v %v)", i, sc.Condition, sc.Style.Layout, sc.Style.Grid, s.Why, s.TraceWidth, s.Grid, s.GridPeriodPx)
		}
	}
	t.Logf("slowest screen %v", slowest)
	// Known miss: one creased photo of a dot-grid sheet on a dark table
	// (case 18 since the renderer was widened) is screened out: digitize
	// still tries such a page when no other page reads and takes it when
	// its grid or pulse gives the scale, but batch would pass it over.
	// More misses than that fail.
	if missed > 1 {
		t.Errorf("%d of %d ECG pages screened out, want at most 1", missed, n)
	}
	outs, _ := filepath.Glob("../../shared/data/outside-printouts/outside0*.[pj][np]g")
	for _, f := range outs {
		pg, err := Load(f, LoadOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if s := Screen(pg); !s.ECG {
			t.Errorf("%s screened out: %s", filepath.Base(f), s.Why)
		}
	}
	for _, dpi := range []float64{100, 200, 300} {
		for turn := 0; turn < 2; turn++ {
			for seed := int64(1); seed <= 2; seed++ {
				img := image.Image(samples.CoverSheet(210, 297, dpi, seed))
				if turn == 1 {
					img = turnQuarter(img)
				}
				s := Screen(&Page{Image: img})
				name := fmt.Sprintf("cover sheet %g dpi turn %d seed %d", dpi, turn, seed)
				if s.ECG {
					t.Errorf("%s taken for an ECG: %s (trace %.2f, grid %v)", name, s.Why, s.TraceWidth, s.GridPeriodPx)
				} else {
					t.Logf("%s: %s", name, s.Why)
				}
			}
		}
	}
}

func turnQuarter(src image.Image) image.Image {
	b := src.Bounds()
	out := image.NewGray(image.Rect(0, 0, b.Dy(), b.Dx()))
	for y := 0; y < b.Dy(); y++ {
		for x := 0; x < b.Dx(); x++ {
			out.SetGray(y, b.Dx()-1-x, color.GrayModel.Convert(src.At(b.Min.X+x, b.Min.Y+y)).(color.Gray))
		}
	}
	return out
}
