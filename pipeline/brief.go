package pipeline

import (
	"fmt"
	"sort"
	"strings"

	"tracelift/axis"
	"tracelift/record"
)

// beatAnnotations turns the detected beats into record annotations
// ("N" for a dominant beat, "V" for one of another shape, "A" for a
// premature beat of dominant shape), for the WFDB and EDF+ exports.
func beatAnnotations(o *Outcome) []record.Annotation {
	if o.Findings == nil {
		return nil
	}
	var out []record.Annotation
	for _, b := range o.Findings.Beats {
		code := "N"
		switch b.Class {
		case "different", "premature-different":
			code = "V"
		case "premature":
			code = "A"
		}
		out = append(out, record.Annotation{TS: b.TS, Code: code})
	}
	return out
}

// Brief is a few lines for a terminal: the scale found, the layout, the
// leads and their confidence, the headline findings and the caution.
func (o *Outcome) Brief() string {
	var b strings.Builder
	if o.Digitized != nil {
		// The verdict comes before any number.
		for i, l := range o.Verdict.Lines() {
			if i == 0 {
				fmt.Fprintf(&b, "verdict    %s\n", l)
			} else {
				fmt.Fprintf(&b, "  why      %s\n", l)
			}
		}
	}
	if o.Pages != nil {
		fmt.Fprintf(&b, "page       %s\n", o.Pages.Line())
	}
	if pg := o.Page; pg != nil && pg.Stated.Note != "" {
		fmt.Fprintf(&b, "pixels     %s\n", pg.Stated.Note)
		if chk := ResolutionCheck(pg, o.Calib); chk != "" {
			fmt.Fprintf(&b, "           the file's resolution: %s\n", chk)
		}
	}
	if c := o.Calib; c != nil {
		fmt.Fprintf(&b, "scale      %.3f × %.3f px/mm (from %s, confidence %.2f), rotation %.2f°\n",
			c.PxPerMMX, c.PxPerMMY, c.Source, c.Confidence, c.RotationDeg)
		fmt.Fprintf(&b, "settings   %g mm/mV, %g mm/s\n", c.GainMMPerMV, c.SpeedMMPerS)
		for _, w := range c.Warnings {
			fmt.Fprintf(&b, "warning    %s\n", w)
		}
	}
	if d := o.Digitized; d != nil {
		order := "standard"
		if d.Cabrera {
			order = "Cabrera"
		}
		fmt.Fprintf(&b, "layout     %s, %s order, %d panels\n", d.Layout, order, len(d.Panels))
		leads := make([]string, 0, len(d.Quality))
		for l := range d.Quality {
			leads = append(leads, l)
		}
		sort.Slice(leads, func(i, j int) bool { return leadRank(leads[i]) < leadRank(leads[j]) })
		var parts []string
		for _, l := range leads {
			parts = append(parts, fmt.Sprintf("%s %.2f", l, d.Quality[l].Confidence))
		}
		fmt.Fprintf(&b, "confidence %s\n", strings.Join(parts, ", "))
		for _, lc := range d.Laws {
			fmt.Fprintf(&b, "lead laws  column %d: Einthoven residual %.0f µV", lc.Column, lc.EinthovenRMSuV)
			if lc.Worst != "" {
				fmt.Fprintf(&b, " (worst fit: %s)", lc.Worst)
			}
			b.WriteByte('\n')
		}
		if n := len(d.Check); n > 0 {
			fmt.Fprintf(&b, "check      %d place(s) worth checking by hand (see the JSON)\n", n)
		}
	}
	if f := o.Findings; f != nil {
		iv := f.IntervalsMS
		fmt.Fprintf(&b, "rate       %s bpm [90 %%: %s to %s] (%s)\n", num(float64(f.HeartRateBPM), 0),
			num(float64(f.HeartRateCI90[0]), 0), num(float64(f.HeartRateCI90[1]), 0), f.Rhythm)
		ci := func(v axis.Num, c [2]axis.Num) string {
			if !c[0].OK() {
				return num(float64(v), 0)
			}
			return fmt.Sprintf("%s [%s–%s]", num(float64(v), 0), num(float64(c[0]), 0), num(float64(c[1]), 0))
		}
		fmt.Fprintf(&b, "intervals  PR %s, QRS %s, QT %s, QTc %s ms (Bazett; 90 %% intervals in brackets)\n",
			ci(iv.PR, iv.PRCI90), ci(iv.QRS, iv.QRSCI90), ci(iv.QT, iv.QTCI90), ci(iv.QTcBazett, iv.QTcBazettCI90))
		cat := f.Axis.QRSCategory
		if f.Axis.QRSCategoryRange != "" {
			cat = "borderline: " + f.Axis.QRSCategoryRange
		}
		if cat != "" {
			cat = " (" + cat + ")"
		}
		fmt.Fprintf(&b, "axes       QRS %s° [90 %%: %s to %s], P %s°, T %s°%s\n",
			num(float64(f.Axis.QRSDeg), 0), num(float64(f.Axis.QRSDegCI90[0]), 0), num(float64(f.Axis.QRSDegCI90[1]), 0),
			num(float64(f.Axis.PDeg), 0), num(float64(f.Axis.TDeg), 0), cat)
		fmt.Fprintf(&b, "transition %s\n", f.Transition)
		for _, fl := range f.Flags {
			fmt.Fprintf(&b, "flag       %s\n", fl.Message)
		}
	} else if o.MeasureErr != nil {
		fmt.Fprintf(&b, "measure    not possible: %v\n", o.MeasureErr)
	}
	fmt.Fprintf(&b, "%s\n", Caution)
	return b.String()
}

func num(v float64, digits int) string { return record.FormatNum(fmt.Sprintf("%%.%df", digits), v) }

func leadRank(l string) int {
	for i, s := range record.Standard12 {
		if s == l {
			return i
		}
	}
	return 100
}
