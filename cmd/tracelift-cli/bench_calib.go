package main

import (
	"fmt"
	"io"
	"sort"
	"strings"
)

// calibCase is what bench --calib-table keeps of calib's reading of a case
// beside the main table's columns.
type calibCase struct {
	Source      string     // calib.Result.Source ("" when calib gave no result)
	HasPulse    bool       // the page was drawn with calibration pulses
	NoScale     bool       // calib found no scale (calib.ErrNoScale)
	LocalErr    [2]float64 // relative px/mm error along time and amplitude, against the truth at Result.ScaleAt
	LocalRotErr float64    // degrees, against the truth's direction at Result.ScaleAt
}

// printCalibTable prints, per condition, calib alone: cases, pages calib
// gave no scale for (no scale on a page without pulses is counted apart:
// when the grid is lost too, nothing on it gives the scale), the px/mm
// error against the truth where calib measured it (median, p95, worst;
// both axes pooled), the rotation error's p95, gain and speed right on
// the pages drawn with a pulse, calib's median time and where its scale
// came from (calib.Result.Source).
func printCalibTable(w io.Writer, cases []benchCase, conds []string) {
	fmt.Fprintln(w, "\ncalib alone (px/mm error against the truth where calib measured it; gain and speed on pages with a pulse):")
	fmt.Fprintf(w, "%-10s %5s %5s %7s %9s %9s %9s %8s %8s %8s %8s  %s\n", "condition", "cases", "fail", "noscale", "med px/mm", "p95 px/mm", "max", "p95 rot", "gain ok", "speed ok", "ms med", "sources")
	groups := append(append([]string(nil), conds...), "all")
	for _, g := range groups {
		var errs, rot, tms []float64
		n, fail, noScale, gainN, gainOK, spOK := 0, 0, 0, 0, 0, 0
		sources := map[string]int{}
		for _, c := range cases {
			if g != "all" && c.Condition != g {
				continue
			}
			n++
			if !c.HasCalib {
				if c.Calib.NoScale && !c.Calib.HasPulse {
					noScale++
				} else {
					fail++
				}
				continue
			}
			tms = append(tms, c.CalibMS)
			sources[c.Calib.Source]++
			errs = append(errs, 100*c.Calib.LocalErr[0], 100*c.Calib.LocalErr[1])
			rot = append(rot, c.Calib.LocalRotErr)
			if c.Calib.HasPulse {
				gainN++
				if c.GainOK {
					gainOK++
				}
				if c.SpeedOK {
					spOK++
				}
			}
		}
		if n == 0 {
			continue
		}
		var src []string
		for s, k := range sources {
			src = append(src, fmt.Sprintf("%s:%d", s, k))
		}
		sort.Strings(src)
		fmt.Fprintf(w, "%-10s %5d %5d %7d %8.3f%% %8.3f%% %8.3f%% %7.3f° %4d/%-3d %4d/%-3d %8.0f  %s\n", g, n, fail, noScale,
			median(errs), pct(errs, 95), pct(errs, 100), pct(rot, 95), gainOK, gainN, spOK, gainN, median(tms), strings.Join(src, " "))
	}
}
