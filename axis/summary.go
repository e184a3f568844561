package axis

import (
	"fmt"
	"strings"

	"tracelift/record"
)

// fmtNum writes v with its uncertainty, or record.Missing when not
// measured.
func fmtNum(v, sd Num, unit string) string {
	if !v.OK() {
		return record.Missing
	}
	if sd.OK() {
		return fmt.Sprintf("%.0f ± %.0f %s", float64(v), float64(sd), unit)
	}
	return fmt.Sprintf("%.0f %s", float64(v), unit)
}

func fmtDeg(v, sd Num) string {
	if !v.OK() {
		return record.Missing
	}
	if sd.OK() {
		return fmt.Sprintf("%+.0f° ± %.0f°", float64(v), float64(sd))
	}
	return fmt.Sprintf("%+.0f°", float64(v))
}

// Summary returns a readable text summary of the findings, ending with
// the caution.
func (f *Findings) Summary() string {
	var b strings.Builder
	w := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	if f.Record != "" {
		w("Record %s\n", f.Record)
	}
	w("Rate      %s (%s, %d beats on %s", fmtNum(f.HeartRateBPM, f.HeartRateSD, "bpm"), f.Rhythm, len(f.Beats), f.BeatLead)
	if f.Premature > 0 {
		w(", %d premature", f.Premature)
	}
	w(")\n")
	iv := f.IntervalsMS
	w("PR        %s\n", fmtNum(iv.PR, iv.PRSD, "ms"))
	w("QRS       %s\n", fmtNum(iv.QRS, iv.QRSSD, "ms"))
	w("QT        %s\n", fmtNum(iv.QT, iv.QTSD, "ms"))
	w("QTc       Bazett %s, Fridericia %s, Framingham %s, Hodges %s\n",
		fmtNum(iv.QTcBazett, iv.QTcSD, "ms"), fmtNum(iv.QTcFridericia, NaN(), "ms"),
		fmtNum(iv.QTcFramingham, NaN(), "ms"), fmtNum(iv.QTcHodges, NaN(), "ms"))
	a := f.Axis
	cat := a.QRSCategory
	if a.QRSCategoryRange != "" {
		cat = "borderline: " + a.QRSCategoryRange
	}
	w("Axes      QRS %s (%s), P %s, T %s\n", fmtDeg(a.QRSDeg, a.QRSDegSD), cat, fmtDeg(a.PDeg, a.PDegSD), fmtDeg(a.TDeg, a.TDegSD))
	if c := a.QRSDegCI90; c[0].OK() {
		w("  QRS axis 90 %% interval %+.0f° to %+.0f°\n", float64(c[0]), float64(c[1]))
	}
	for _, m := range a.Methods {
		w("  %-14s QRS %-6s P %-6s T %-6s %s\n", m.Method, fmtDeg(m.QRSDeg, NaN()), fmtDeg(m.PDeg, NaN()), fmtDeg(m.TDeg, NaN()), m.Detail)
	}
	if a.Spread.OK() {
		w("  methods agree within %.0f°\n", float64(a.Spread))
	}
	if f.RhythmNote != "" {
		w("Rhythm    unsure: %s\n", f.RhythmNote)
	}
	if f.Transition != "" {
		w("Transition %s (%s)\n", f.Transition, f.TransitionCl)
	}
	if len(f.Flags) > 0 {
		w("Flags\n")
		for _, fl := range f.Flags {
			w("  - %s", fl.Message)
			if fl.Caution != "" {
				w(" [%s]", fl.Caution)
			}
			w("\n")
		}
	}
	w("\n%s\n", Caution)
	return b.String()
}
