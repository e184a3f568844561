package coverage

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"tracelift/axis"
	"tracelift/pipeline"
	"tracelift/record"
)

// outsideTruth is the part of an outside page's truth file that is read
// (see ../shared/data/outside-printouts/README.md).
type outsideTruth struct {
	Image     string  `json:"image"`
	Layout    string  `json:"layout"`
	Condition string  `json:"condition"`
	DPI       float64 `json:"dpi"`
	FsHz      float64 `json:"fs_hz"`
	Leads     map[string]struct {
		T0 float64   `json:"t0"`
		MV []float64 `json:"mV"`
	} `json:"leads"`
	Synthetic *struct {
		QRSAxisNetDeg float64 `json:"qrs_axis_net_vector_deg"`
		HeartRateBPM  float64 `json:"heart_rate_bpm"`
	} `json:"synthetic_details"`
}

// Outside digitizes the outside pages in dir (each outsideNN.json beside
// its picture) and pairs the findings with their truth: for synthetic
// pages the QRS axis is the heart vector's own (qrs_axis_net_vector_deg)
// and the rate the stated one; every other measure, and all of a real
// record's, is the engine's reading of the signals drawn (the leads in
// the truth file). A clean scan whose scale calib cannot find is given
// the stated dpi, as a user would (a photo has no dpi of its own).
func Outside(dir string) ([]Case, error) {
	files, err := filepath.Glob(filepath.Join(dir, "outside*.json"))
	if err != nil {
		return nil, err
	}
	if len(files) == 0 {
		return nil, fmt.Errorf("coverage: no outside*.json in %s", dir)
	}
	sort.Strings(files)
	var out []Case
	for i, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			return nil, err
		}
		var tr outsideTruth
		if err := json.Unmarshal(b, &tr); err != nil {
			return nil, fmt.Errorf("coverage: %s: %w", f, err)
		}
		c := Case{N: i, Condition: tr.Condition, Source: strings.TrimSuffix(filepath.Base(f), ".json"), Layout: tr.Layout, GeneratorAxisDeg: math.NaN()}
		path := filepath.Join(dir, tr.Image)
		o, err := pipeline.Process(context.Background(), path, pipeline.Options{})
		if err != nil && tr.DPI > 0 && tr.Condition == "clean" {
			// A scan keeps the print's dpi; a photo does not.
			opt := pipeline.Options{}
			opt.Calib.UserDPI = tr.DPI
			o, err = pipeline.Process(context.Background(), path, opt)
		}
		if err != nil {
			c.Err = err.Error()
			c.Verdict = pipeline.NotReadable
			out = append(out, c)
			continue
		}
		c.Verdict = o.Verdict.Level
		for _, r := range o.Verdict.Reasons {
			c.Reasons = append(c.Reasons, r.Code)
		}
		rec := &record.Record{Name: c.Source}
		for name, l := range tr.Leads {
			rec.Signals = append(rec.Signals, record.Signal{Lead: record.CanonicalLead(name), RateHz: tr.FsHz, StartS: l.T0, MV: l.MV})
		}
		truth, err := axis.Measure(rec, axis.Options{})
		if err != nil || o.Findings == nil {
			if err != nil {
				c.Err = "truth: " + err.Error()
			}
			out = append(out, c)
			continue
		}
		c.Meas = Compare(o.Findings, truth)
		c.Page, c.MeanConf = pipeline.PictureFacts(o.Calib, o.Digitized), o.Findings.MeanLeadConfidence
		c.Doubts = axis.Doubts{TimeRatio: o.Findings.TimeScaleRatio, Rate: axis.RateDisagrees(o.Findings)}
		if s := tr.Synthetic; s != nil {
			c.GeneratorAxisDeg = s.QRSAxisNetDeg
			for k, m := range c.Meas {
				switch k {
				case "qrs_deg":
					m.Truth = s.QRSAxisNetDeg
				case "heart_rate_bpm":
					m.Truth = s.HeartRateBPM
				}
				c.Meas[k] = m
			}
		}
		out = append(out, c)
	}
	return out, nil
}
