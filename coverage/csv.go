package coverage

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
	"strings"

	"tracelift/pipeline"
)

var csvHeader = []string{"case", "condition", "source", "layout", "error", "verdict", "reasons", "measure", "est", "lo", "hi", "truth", "exact", "engine_sd", "picture_sd"}

// WriteCSV writes one row per case and measure (a case without
// measurements gets one row with an empty measure).
func WriteCSV(w io.Writer, cases []Case) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(csvHeader); err != nil {
		return err
	}
	g := func(v float64) string { return strconv.FormatFloat(v, 'g', 8, 64) }
	for _, c := range cases {
		head := []string{strconv.Itoa(c.N), c.Condition, c.Source, c.Layout, c.Err, string(c.Verdict), strings.Join(c.Reasons, " ")}
		if len(c.Meas) == 0 {
			if err := cw.Write(append(head, "", "", "", "", "", "", "", "")); err != nil {
				return err
			}
			continue
		}
		for _, name := range Measures {
			m, ok := c.Meas[name]
			if !ok {
				continue
			}
			row := append(append([]string(nil), head...), name, g(m.Est), g(m.Lo), g(m.Hi), g(m.Truth), g(m.Exact), g(m.EngineSD), g(m.PictureSD))
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
		return nil, fmt.Errorf("coverage: not a coverage table (header %v)", csvHeader)
	}
	var out []Case
	idx := map[string]int{}
	for _, rec := range recs[1:] {
		key := rec[0]
		i, ok := idx[key]
		if !ok {
			n, err := strconv.Atoi(rec[0])
			if err != nil {
				return nil, fmt.Errorf("coverage: bad case number %q", rec[0])
			}
			c := Case{N: n, Condition: rec[1], Source: rec[2], Layout: rec[3], Err: rec[4], Verdict: pipeline.Level(rec[5]), Meas: map[string]Meas{}}
			if rec[6] != "" {
				c.Reasons = strings.Fields(rec[6])
			}
			out = append(out, c)
			i = len(out) - 1
			idx[key] = i
		}
		if rec[7] == "" {
			continue
		}
		var v [7]float64
		for k := range v {
			f, err := strconv.ParseFloat(rec[8+k], 64)
			if err != nil {
				return nil, fmt.Errorf("coverage: case %s: %w", key, err)
			}
			v[k] = f
		}
		out[i].Meas[rec[7]] = Meas{Est: v[0], Lo: v[1], Hi: v[2], Truth: v[3], Exact: v[4], EngineSD: v[5], PictureSD: v[6]}
	}
	return out, nil
}
