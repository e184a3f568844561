package report

import (
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"sort"
	"strings"

	"tracelift/digitize"
	"tracelift/pipeline"
	"tracelift/record"
)

// Write renders the printable summary of a pipeline outcome on the paper
// named in opt ("a4" when empty). It is the pipeline's PDF writer: pass it
// as pipeline.ExportOptions.PDF.
func Write(w io.Writer, o *pipeline.Outcome, opt pipeline.ExportOptions) error {
	s, err := FromOutcome(o, opt)
	if err != nil {
		return err
	}
	return Render(w, s, opt.Paper)
}

// headerLabels are the fields printed in the header, in this order, with
// the keys of ExportOptions.Header that fill them (case-blind). Keys not
// listed here follow in alphabetical order, up to six fields in all.
var headerLabels = []struct {
	Label string
	Keys  []string
}{
	{"Name", []string{"name", "patient"}},
	{"Identifier", []string{"id", "identifier"}},
	{"Date of birth", []string{"dob", "date of birth", "birth"}},
	{"Recorded", []string{"recorded", "date", "recorded at"}},
	{"Reviewed by", []string{"reviewer", "reviewed by"}},
}

// headerFields turns the user's header map into printed fields; an empty
// map gives the blank fields to fill in by hand.
func headerFields(h map[string]string) []Field {
	used := map[string]bool{}
	var out []Field
	for _, hl := range headerLabels {
		f := Field{Label: hl.Label}
		for k, v := range h {
			for _, key := range hl.Keys {
				if strings.EqualFold(strings.TrimSpace(k), key) && !used[k] {
					f.Value, used[k] = strings.TrimSpace(v), true
				}
			}
		}
		out = append(out, f)
	}
	var rest []string
	for k := range h {
		if !used[k] && strings.TrimSpace(k) != "" {
			rest = append(rest, k)
		}
	}
	sort.Strings(rest)
	for _, k := range rest {
		out = append(out, Field{Label: strings.TrimSpace(k), Value: strings.TrimSpace(h[k])})
	}
	if len(out) > 6 {
		out = out[:6]
	}
	return out
}

// FromOutcome gathers what the page shows from a pipeline outcome: the
// user's header fields, the digitized leads, the findings (or why
// measuring failed), the calibration facts, the per-lead quality, the
// lead-law checks and places to check by hand, and the source image with
// the traced centre lines mapped back onto it.
func FromOutcome(o *pipeline.Outcome, opt pipeline.ExportOptions) (*Summary, error) {
	if o == nil || o.Digitized == nil || o.Digitized.Record == nil {
		return nil, errors.New("report: nothing was digitized")
	}
	dr := o.Digitized
	s := &Summary{
		Header:  headerFields(opt.Header),
		Record:  dr.Record,
		Caution: pipeline.Caution,
	}
	// Facts: where the page came from and how it was scaled.
	if pg := o.Page; pg != nil {
		f := "source: " + filepath.Base(pg.Path)
		if pg.PageCount > 1 {
			f += fmt.Sprintf(", page %d of %d", pg.PageIndex+1, pg.PageCount)
		}
		if len(pg.SHA256) >= 12 {
			f += ", sha256 " + pg.SHA256[:12] + "…"
		}
		s.Facts = append(s.Facts, f)
	}
	if c := o.Calib; c != nil {
		s.Facts = append(s.Facts, fmt.Sprintf("scale %.2f × %.2f px/mm from the %s, %g mm/s, %g mm/mV, rotation %.1f°, confidence %.0f%%",
			c.PxPerMMX, c.PxPerMMY, orWord(c.Source, "page"), c.SpeedMMPerS, c.GainMMPerMV, c.RotationDeg, 100*c.Confidence))
	}
	layout := dr.Layout
	if dr.Cabrera {
		layout += ", Cabrera order"
	}
	s.Facts = append(s.Facts, fmt.Sprintf("layout %s; %s", orWord(layout, "unknown"), pipeline.Software))

	v := o.Verdict
	s.Verdict, s.VerdictLevel = v.Level.Label(), string(v.Level)
	for _, r := range v.Reasons {
		t := r.Text
		if r.Do != "" {
			t += " (" + r.Do + ")"
		}
		s.VerdictReasons = append(s.VerdictReasons, t)
	}
	// The Checks list starts with the verdict's reasons, in full.
	s.QualityNotes = append(s.QualityNotes, s.VerdictReasons...)
	if o.Findings != nil {
		s.AddFindings(o.Findings)
	} else if o.MeasureErr != nil {
		s.Flags = append(s.Flags, "not measured: "+o.MeasureErr.Error())
	}
	if c := o.Calib; c != nil {
		for _, w := range c.Warnings {
			s.QualityNotes = append(s.QualityNotes, w)
		}
	}
	s.Quality = qualityOf(dr.Quality)
	for _, l := range dr.Laws {
		s.QualityNotes = append(s.QualityNotes, lawNote(l))
	}
	for _, p := range dr.Check {
		s.QualityNotes = append(s.QualityNotes, fmt.Sprintf("check %s %.2f–%.2f s: %s", p.Lead, p.T0S, p.T1S, p.Why))
	}
	if o.Page != nil && o.Page.Image != nil && o.Calib != nil {
		s.Source = o.Page.Image
		s.Overlay = overlay(dr.Traces, o.Calib.RectToImage)
	}
	return s, nil
}

func orWord(s, w string) string {
	if s == "" {
		return w
	}
	return s
}

// qualityOf lists the quality figures, standard leads first in their
// order.
func qualityOf(q map[string]digitize.LeadQuality) []Quality {
	var out []Quality
	seen := map[string]bool{}
	add := func(l string) {
		v, ok := q[l]
		if !ok || seen[l] {
			return
		}
		seen[l] = true
		note := ""
		if len(v.Notes) > 0 {
			note = v.Notes[0]
		}
		out = append(out, Quality{Lead: l, Confidence: v.Confidence, Note: note})
	}
	for _, l := range record.Standard12 {
		add(l)
	}
	var rest []string
	for l := range q {
		if !seen[l] {
			rest = append(rest, l)
		}
	}
	sort.Strings(rest)
	for _, l := range rest {
		add(l)
	}
	return out
}

// lawNote words a lead-law check; −1 marks a relation that could not be
// checked.
func lawNote(l digitize.LawCheck) string {
	var parts []string
	if l.EinthovenRMSuV >= 0 {
		parts = append(parts, fmt.Sprintf("II = I + III off by %.0f µV", l.EinthovenRMSuV))
	}
	for i, name := range []string{"aVR", "aVL", "aVF"} {
		if v := l.GoldbergerRMSuV[i]; v >= 0 {
			parts = append(parts, fmt.Sprintf("%s %.0f µV", name, v))
		}
	}
	if len(parts) == 0 {
		parts = append(parts, "limb-lead laws not checkable")
	}
	s := fmt.Sprintf("%.1f–%.1f s: ", l.T0S, l.T1S) + strings.Join(parts, ", ")
	if l.Worst != "" {
		s += "; worst " + l.Worst
	}
	return s + " (rms)"
}

// overlay maps the traced centre lines from rectified px to source-image
// px through the homography h. digitize puts pixel centres at +0.5 and
// calib at whole numbers; Summary.Overlay uses the image's own coordinates
// (pixel x covers [x, x+1)), so centres are at +0.5 again.
func overlay(traces []digitize.Trace, h [9]float64) []Polyline {
	var out []Polyline
	for _, tr := range traces {
		n := len(tr.Y)
		step := max(1, n/3000) // at most ~3000 points a lead: finer than the page can show
		p := Polyline{Lead: tr.Lead}
		for i := 0; i < n; i += step {
			y := tr.Y[i]
			if math.IsNaN(y) {
				p.X, p.Y = append(p.X, math.NaN()), append(p.Y, math.NaN())
				continue
			}
			xr, yr := float64(tr.X0+i), y-0.5
			w := h[6]*xr + h[7]*yr + h[8]
			if w == 0 || math.IsNaN(w) {
				p.X, p.Y = append(p.X, math.NaN()), append(p.Y, math.NaN())
				continue
			}
			u := (h[0]*xr+h[1]*yr+h[2])/w + 0.5
			v := (h[3]*xr+h[4]*yr+h[5])/w + 0.5
			p.X, p.Y = append(p.X, u), append(p.Y, v)
		}
		out = append(out, p)
	}
	return out
}
