package report

import (
	"fmt"
	"math"

	"tracelift/axis"
)

// num returns a finding as a float64, NaN when it was not measured.
func num(n axis.Num) float64 {
	if !n.OK() {
		return math.NaN()
	}
	return float64(n)
}

// sdOf returns an uncertainty, NaN when unknown.
func sdOf(n axis.Num) float64 { return num(n) }

// AddFindings fills the measurement rows, the axes, the category, the
// transition and the flags of s from the measurement engine's findings.
// Values are printed with the precision the engine's uncertainties
// support: whole bpm, ms and degrees.
func (s *Summary) AddFindings(f *axis.Findings) {
	if f == nil {
		return
	}
	// The ± printed is the half-width of the 90 % interval (the spread
	// over beats with the error the picture adds) where the engine gives
	// one, else its standard deviation; of an interval stretched to one
	// side (a page whose time scale is in doubt), its wider side.
	half := func(v axis.Num, ci [2]axis.Num, sd axis.Num) float64 {
		if ci[0].OK() && ci[1].OK() {
			if v.OK() {
				return math.Max(float64(v-ci[0]), float64(ci[1]-v))
			}
			return float64(ci[1]-ci[0]) / 2
		}
		return sdOf(sd)
	}
	row := func(name string, v, sd float64, unit, note string) {
		val, pm := FormatValue(v, sd, 0)
		s.Measurements = append(s.Measurements, Row{Name: name, Value: val, Uncertainty: pm, Unit: unit, Note: note})
	}
	iv := f.IntervalsMS
	rhythm := f.Rhythm
	if rhythm == "undetermined" {
		rhythm = ""
	}
	row("Heart rate", num(f.HeartRateBPM), half(f.HeartRateBPM, f.HeartRateCI90, f.HeartRateSD), "bpm", rhythm)
	row("RR", num(f.RRMeanS)*1000, sdOf(f.RRSDS)*1000, "ms", "")
	row("PR", num(iv.PR), half(iv.PR, iv.PRCI90, iv.PRSD), "ms", "")
	row("QRS", num(iv.QRS), half(iv.QRS, iv.QRSCI90, iv.QRSSD), "ms", "")
	row("QT", num(iv.QT), half(iv.QT, iv.QTCI90, iv.QTSD), "ms", "")
	// The engine gives the uncertainty of Bazett's QTc only (the most
	// rate-sensitive of the four); the others print without one.
	row("QTc", num(iv.QTcBazett), half(iv.QTcBazett, iv.QTcBazettCI90, iv.QTcSD), "ms", "Bazett")
	row("QTc", num(iv.QTcFridericia), math.NaN(), "ms", "Fridericia")
	row("QTc", num(iv.QTcFramingham), math.NaN(), "ms", "Framingham")
	row("QTc", num(iv.QTcHodges), math.NaN(), "ms", "Hodges")

	a := f.Axis
	s.Axes = []Axis{
		{Name: "QRS", Deg: num(a.QRSDeg), PlusMinusDeg: half(a.QRSDeg, a.QRSDegCI90, a.QRSDegSD)},
		{Name: "P", Deg: num(a.PDeg), PlusMinusDeg: half(a.PDeg, a.PDegCI90, a.PDegSD)},
		{Name: "T", Deg: num(a.TDeg), PlusMinusDeg: half(a.TDeg, a.TDegCI90, a.TDegSD)},
	}
	s.Category = a.QRSCategory
	if a.QRSCategoryRange != "" {
		s.Category = "borderline: " + a.QRSCategoryRange
	}
	if a.Spread.OK() && s.Category != "" {
		s.Category += fmt.Sprintf("; methods within %.0f°", float64(a.Spread))
	}
	s.Transition = f.Transition
	if f.Transition != "" && f.TransitionCl != "" {
		s.Transition += " (" + f.TransitionCl + ")"
	}
	if n := len(f.Beats); n > 0 {
		s.Facts = append(s.Facts, fmt.Sprintf("%d beats found on lead %s, %d premature", n, f.BeatLead, f.Premature))
	}
	for _, fl := range f.Flags {
		s.Flags = append(s.Flags, fl.Message)
	}
}
