package coverage

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"tracelift/axis"
	"tracelift/pipeline"
)

// The columns: the case, what the pipeline knew of its page (the inputs
// of the picture factor), then one measurement.
var csvHeader = []string{"case", "condition", "source", "layout", "error", "verdict", "reasons",
	"scale_source", "scale_conf", "law_uv", "pulse_assumed", "t0_unsure", "faint_share", "gappy_share", "bilevel", "mean_conf", "time_ratio", "rate_doubt",
	"measure", "est", "lo", "hi", "truth", "exact", "engine_sd", "picture_sd", "unit_sd"}

const (
	colMeasure = 18 // index of "measure"
	numCols    = 8  // numbers after it
)

// WriteCSV writes one row per case and measure (a case without
// measurements gets one row with an empty measure).
func WriteCSV(w io.Writer, cases []Case) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(csvHeader); err != nil {
		return err
	}
	g := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	b := func(v bool) string { return strconv.FormatBool(v) }
	for _, c := range cases {
		p := c.Page
		head := []string{strconv.Itoa(c.N), c.Condition, c.Source, c.Layout, c.Err, string(c.Verdict), strings.Join(c.Reasons, " "),
			p.ScaleSource, g(p.ScaleConfidence), g(p.LawResidualUV), b(p.PulseAssumed), b(p.TimeZeroUnsure), g(p.FaintShare), g(p.GappyShare), b(p.Bilevel), g(c.MeanConf), g(c.Doubts.TimeRatio), b(c.Doubts.Rate)}
		if !p.Digitized {
			// No facts: the page was not traced.
			for k := 7; k < colMeasure; k++ {
				head[k] = ""
			}
		}
		if len(c.Meas) == 0 {
			if err := cw.Write(append(head, make([]string, 1+numCols)...)); err != nil {
				return err
			}
			continue
		}
		for _, name := range Measures {
			m, ok := c.Meas[name]
			if !ok {
				continue
			}
			row := append(append([]string(nil), head...), name, g(m.Est), g(m.Lo), g(m.Hi), g(m.Truth), g(m.Exact), g(m.EngineSD), g(m.PictureSD), g(m.Unit))
			if err := cw.Write(row); err != nil {
				return err
			}
		}
	}
	cw.Flush()
	return cw.Error()
}

// ReadCSV reads cases written by WriteCSV.
func ReadCSV(r io.Reader) ([]Case, error) {
	recs, err := csv.NewReader(r).ReadAll()
	if err != nil {
		return nil, fmt.Errorf("coverage: %w", err)
	}
	if len(recs) == 0 || strings.Join(recs[0], ",") != strings.Join(csvHeader, ",") {
		return nil, fmt.Errorf("coverage: not a coverage table of this version (want the header %s)", strings.Join(csvHeader, ","))
	}
	var out []Case
	idx := map[string]int{}
	for line, rec := range recs[1:] {
		key := rec[0]
		i, ok := idx[key]
		if !ok {
			n, err := strconv.Atoi(rec[0])
			if err != nil {
				return nil, fmt.Errorf("coverage: line %d: bad case number %q", line+2, rec[0])
			}
			c := Case{N: n, Condition: rec[1], Source: rec[2], Layout: rec[3], Err: rec[4], Verdict: pipeline.Level(rec[5]), Meas: map[string]Meas{}, GeneratorAxisDeg: math.NaN()}
			if rec[6] != "" {
				c.Reasons = strings.Fields(rec[6])
			}
			var bad error
			num := func(s string) float64 {
				f, err := strconv.ParseFloat(s, 64)
				if err != nil && bad == nil {
					bad = err
				}
				return f
			}
			flag := func(s string) bool {
				v, err := strconv.ParseBool(s)
				if err != nil && bad == nil {
					bad = err
				}
				return v
			}
			if rec[8] != "" {
				c.Page = axis.Picture{Digitized: true, ScaleSource: rec[7], ScaleConfidence: num(rec[8]), LawResidualUV: num(rec[9]),
					PulseAssumed: flag(rec[10]), TimeZeroUnsure: flag(rec[11]), FaintShare: num(rec[12]), GappyShare: num(rec[13]), Bilevel: flag(rec[14])}
				c.MeanConf = num(rec[15])
				c.Doubts = axis.Doubts{TimeRatio: num(rec[16]), Rate: flag(rec[17])}
			}
			if bad != nil {
				return nil, fmt.Errorf("coverage: line %d: %w", line+2, bad)
			}
			out = append(out, c)
			i = len(out) - 1
			idx[key] = i
		}
		if rec[colMeasure] == "" {
			continue
		}
		var v [numCols]float64
		for k := range v {
			f, err := strconv.ParseFloat(rec[colMeasure+1+k], 64)
			if err != nil {
				return nil, fmt.Errorf("coverage: line %d (case %s): %w", line+2, key, err)
			}
			v[k] = f
		}
		out[i].Meas[rec[colMeasure]] = Meas{Est: v[0], Lo: v[1], Hi: v[2], Truth: v[3], Exact: v[4], EngineSD: v[5], PictureSD: v[6], Unit: v[7]}
	}
	return out, nil
}
