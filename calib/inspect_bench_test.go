package calib

import (
	"context"
	"fmt"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"tracelift/record"
	"tracelift/record/wfdb"
	"tracelift/samples"
)

// benchPage rebuilds case i of `tracelift-cli bench --seed seed
// --conditions conds` as the bench feeds it to calib: rendered, degraded,
// encoded (JPEG at quality 90 for photos, PNG otherwise) and decoded.
func benchPage(t testing.TB, seed int64, i int, conds []string, dpi float64) (*Page, *samples.Printout, samples.SuiteCase) {
	t.Helper()
	var real *record.Record
	if r, err := wfdb.ReadRecord("../../shared/data/ptb-s0010_re/s0010_re.hea"); err == nil {
		real = r
	}
	sc := samples.NewSuiteCase(seed, i, conds, real)
	if dpi > 0 {
		sc.Style.DPI = dpi
	}
	po, err := sc.Printout()
	if err != nil {
		t.Fatalf("render: %v", err)
	}
	name, data, err := sc.File(po)
	if err != nil {
		t.Fatal(err)
	}
	pg, err := Decode(data, name, LoadOptions{})
	if err != nil {
		t.Fatalf("decode: %v", err)
	}
	return pg, po, sc
}

// TestInspectBenchCalib rebuilds bench cases and logs calib's result
// against the truth, one line a case ("!" where the limits are
// missed): the scale and skew errors as the bench scores them (the truth
// at the middle of the panels), then "local", the errors where the result
// says its scale holds (ScaleAt; under perspective the scale changes
// across the page), and how far apart the two points are. With
// TRACELIFT_CALIB_VERBOSE=1 it also logs the grid search and draws the
// picture, the rectified page and the ink map to /tmp/cal/
// (TRACELIFT_BENCH_CASES=38,48 or 0-99, TRACELIFT_BENCH_SEED=1,
// TRACELIFT_BENCH_CONDITIONS=photo, TRACELIFT_BENCH_DPI=300 stand for the
// bench's flags; not run otherwise).
func TestInspectBenchCalib(t *testing.T) {
	spec := os.Getenv("TRACELIFT_BENCH_CASES")
	if spec == "" {
		t.Skip("set TRACELIFT_BENCH_CASES=N[,M…] to inspect bench cases")
	}
	seed := int64(1)
	if v := os.Getenv("TRACELIFT_BENCH_SEED"); v != "" {
		s, err := strconv.ParseInt(v, 10, 64)
		if err != nil {
			t.Fatal(err)
		}
		seed = s
	}
	conds := []string{"clean", "rotated", "photocopy", "photo", "fax"}
	if v := os.Getenv("TRACELIFT_BENCH_CONDITIONS"); v != "" {
		conds = strings.Split(v, ",")
	}
	dpi, _ := strconv.ParseFloat(os.Getenv("TRACELIFT_BENCH_DPI"), 64)
	verbose := os.Getenv("TRACELIFT_CALIB_VERBOSE") != ""
	var idx []int
	for _, f := range strings.Split(spec, ",") {
		if lo, hi, ok := strings.Cut(f, "-"); ok {
			a, _ := strconv.Atoi(lo)
			b, _ := strconv.Atoi(hi)
			for i := a; i <= b; i++ {
				idx = append(idx, i)
			}
			continue
		}
		i, err := strconv.Atoi(f)
		if err != nil {
			t.Fatal(err)
		}
		idx = append(idx, i)
	}
	for _, i := range idx {
		pg, po, sc := benchPage(t, seed, i, conds, dpi)
		if verbose {
			dbgGrid = func(f string, a ...any) { t.Logf(f, a...) }
		}
		res, err := Detect(context.Background(), pg, Options{})
		dbgGrid = nil
		tr := po.Truth
		if verbose {
			savePNG(t, fmt.Sprintf("/tmp/cal/b%d_%d-src.png", seed, i), po.Image)
		}
		if err != nil {
			t.Logf("! %3d %s grid %d pulses %v: %v", i, tr.Condition, sc.Style.Grid, sc.Style.Pulses, err)
			continue
		}
		ex, ey := res.PxPerMMX/tr.PxPerMMX-1, res.PxPerMMY/tr.PxPerMMY-1
		tx, ty, trot := truthAt(tr, res.ScaleAt[0], res.ScaleAt[1])
		rot := res.RotationDeg + 90*float64(res.Turned) - tr.RotationDeg
		rot = math.Mod(rot+540, 360) - 180
		var pcx, pcy float64
		for _, pn := range tr.Panels {
			pcx += (pn.Box[0] + pn.Box[2]) / 2 / float64(len(tr.Panels))
			pcy += (pn.Box[1] + pn.Box[3]) / 2 / float64(len(tr.Panels))
		}
		px, py := samples.Apply(tr.PageToImage, pcx, pcy)
		if verbose {
			if inv, ok := mat3(res.RectToImage).inv(); ok {
				ax, ay := inv.apply(res.ScaleAt[0], res.ScaleAt[1])
				bx, by := inv.apply(px, py)
				t.Logf("case %d in the rectified page (%v): ScaleAt %.0f,%.0f truth point %.0f,%.0f", i, res.Rectified.Bounds().Size(), ax, ay, bx, by)
			}
			t.Logf("case %d: ScaleAt %.0f,%.0f; the bench's truth point %.0f,%.0f (%.1f mm apart); image %v", i, res.ScaleAt[0], res.ScaleAt[1], px, py, math.Hypot(res.ScaleAt[0]-px, res.ScaleAt[1]-py)/tr.PxPerMMX, pg.Image.Bounds().Size())
		}
		bad := " "
		if math.Abs(ex) > 0.01 || math.Abs(ey) > 0.01 || math.Abs(rot) > 0.2 || (sc.Style.Pulses && res.GainMMPerMV != tr.GainMMPerMV) {
			bad = "!"
		}
		t.Logf("%s %3d %3.0fdpi g%d %-6s %-5s x %+6.2f%% y %+6.2f%% rot %+6.2f° | local %+6.2f%% %+6.2f%% %4.1fmm off | gain %v/%v pulses %d printed %v conf %.2f", bad, i, tr.CleanPxPerMM*25.4, sc.Style.Grid, sc.Style.Layout, res.Source,
			100*ex, 100*ey, rot, 100*(res.PxPerMMX/tx-1), 100*(res.PxPerMMY/ty-1), math.Hypot(res.ScaleAt[0]-px, res.ScaleAt[1]-py)/tr.PxPerMMX, res.GainMMPerMV, tr.GainMMPerMV, len(res.Pulses), sc.Style.Pulses, res.Confidence)
		if !verbose {
			continue
		}
		t.Logf("case %d (%s %v dpi grid %d layout %s): err x %+.2f%% y %+.2f%% rot %+.2f° turned %d | at ScaleAt: %+.2f%% %+.2f%% rot %+.2f° | gain %v (truth %v) speed %v (%v) src %s conf %.2f pulses %d warn %q",
			i, tr.Condition, tr.CleanPxPerMM*25.4, sc.Style.Grid, sc.Style.Layout, 100*ex, 100*ey, rot, res.Turned, 100*(res.PxPerMMX/tx-1), 100*(res.PxPerMMY/ty-1), res.RotationDeg-trot,
			res.GainMMPerMV, tr.GainMMPerMV, res.SpeedMMPerS, tr.SpeedMMPerS, res.Source, res.Confidence, len(res.Pulses), res.Warnings)
		savePNG(t, fmt.Sprintf("/tmp/cal/b%d_%d-rect.png", seed, i), res.Rectified)
		savePNG(t, fmt.Sprintf("/tmp/cal/b%d_%d-ink.png", seed, i), res.Ink)
	}
}

func savePNG(t *testing.T, path string, im image.Image) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if err := png.Encode(f, im); err != nil {
		t.Fatal(err)
	}
}
