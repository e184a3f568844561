package model

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"tracelift/record"
)

// The editing tools in image terms: the app passes rectified pixel
// positions and the model turns them into corrections in tracing time and
// mV, with the mapping the digitizer uses (t = T0S + (x + 0.5 − x0) /
// (px/mm · mm/s), mV = sign · (baseline − y) / (px/mm · mm/mV)).

// ErrNoPanel is returned when an edit names no panel.
var ErrNoPanel = errors.New("model: no panel there; start on a panel (its box is outlined)")

func (m *Model) panel(i int) (*PanelView, error) {
	if m.a == nil || i < 0 || i >= len(m.views) {
		return nil, ErrNoPanel
	}
	return &m.views[i], nil
}

func (m *Model) pxPerS() float64  { return m.a.PxPerMM * m.a.SpeedMMPerS }
func (m *Model) pxPerMV() float64 { return m.a.PxPerMM * m.a.GainMMPerMV }

// PanelAt returns the index of the panel under the point, or -1.
func (m *Model) PanelAt(x, y float64) int {
	for i, v := range m.views {
		if x >= v.Box[0] && x < v.Box[2] && y >= v.Box[1] && y < v.Box[3] {
			return i
		}
	}
	return -1
}

// TimeAt returns the tracing time at column x of panel i.
func (m *Model) TimeAt(i int, x float64) float64 {
	v := m.views[i]
	return v.T0S + (x+0.5-v.Box[0])/m.pxPerS()
}

// XAt returns the column of time t in panel i (the inverse of TimeAt).
func (m *Model) XAt(i int, t float64) float64 {
	v := m.views[i]
	return v.Box[0] - 0.5 + (t-v.T0S)*m.pxPerS()
}

// MVAt returns the lead's value drawn at height y in panel i.
func (m *Model) MVAt(i int, y float64) float64 {
	v := m.views[i]
	return v.Sign * (v.BaselineY - y) / m.pxPerMV()
}

// YAt returns the height at which value mv is drawn in panel i.
func (m *Model) YAt(i int, mv float64) float64 {
	v := m.views[i]
	return v.BaselineY - v.Sign*mv*m.pxPerMV()
}

// Polyline returns the corrected signal of panel i in image px over the
// panel's time window: one slice per unbroken stretch (gaps split it).
func (m *Model) Polyline(i int) [][][2]float64 {
	v := m.views[i]
	if m.rec == nil {
		return nil
	}
	s := m.rec.Lead(v.Lead)
	if s == nil {
		return nil
	}
	var out [][][2]float64
	var cur [][2]float64
	i0, i1 := span(s, v.T0S, v.T1S)
	for k := i0; k < i1; k++ {
		mv := s.MV[k]
		if math.IsNaN(mv) {
			if len(cur) > 1 {
				out = append(out, cur)
			}
			cur = nil
			continue
		}
		t := s.StartS + float64(k)/s.RateHz
		cur = append(cur, [2]float64{m.XAt(i, t), m.YAt(i, mv)})
	}
	if len(cur) > 1 {
		out = append(out, cur)
	}
	return out
}

func span(s *record.Signal, t0, t1 float64) (int, int) {
	n := float64(len(s.MV))
	a := math.Min(math.Max(math.Ceil((t0-s.StartS)*s.RateHz), 0), n)
	b := math.Min(math.Max(math.Floor((t1-s.StartS)*s.RateHz)+1, 0), n)
	return int(a), int(max(a, b))
}

func (m *Model) stretch(i int, x0, x1 float64) (*PanelView, float64, float64, error) {
	v, err := m.panel(i)
	if err != nil {
		return nil, 0, 0, err
	}
	if x1 < x0 {
		x0, x1 = x1, x0
	}
	t0, t1 := m.TimeAt(i, x0), m.TimeAt(i, x1)
	t0, t1 = math.Max(t0, v.T0S), math.Min(t1, v.T1S)
	if !(t1 > t0) {
		return nil, 0, 0, fmt.Errorf("model: the stretch is empty")
	}
	return v, t0, t1, nil
}

// ShiftStretch moves the trace of panel i between columns x0 and x1 down
// by dy px (up when negative).
func (m *Model) ShiftStretch(i int, x0, x1, dy float64) error {
	v, t0, t1, err := m.stretch(i, x0, x1)
	if err != nil {
		return err
	}
	return m.Edit(record.Correction{Kind: record.CorrShift, Lead: v.Lead, StartS: t0, EndS: t1,
		OffsetMV: -v.Sign * dy / m.pxPerMV()})
}

// Erase turns the trace of panel i between columns x0 and x1 into a gap.
func (m *Model) Erase(i int, x0, x1 float64) error {
	v, t0, t1, err := m.stretch(i, x0, x1)
	if err != nil {
		return err
	}
	return m.Edit(record.Correction{Kind: record.CorrErase, Lead: v.Lead, StartS: t0, EndS: t1})
}

// Redraw replaces the trace of panel i under a freehand stroke (points in
// image px, in any order) by the stroke.
func (m *Model) Redraw(i int, pts [][2]float64) error {
	v, err := m.panel(i)
	if err != nil {
		return err
	}
	var ps []record.Point
	for _, p := range pts {
		t := m.TimeAt(i, p[0])
		if t < v.T0S || t > v.T1S {
			continue
		}
		ps = append(ps, record.Point{TS: t, MV: m.MVAt(i, p[1])})
	}
	sort.SliceStable(ps, func(a, b int) bool { return ps[a].TS < ps[b].TS })
	rate := 500.0
	if s := m.rec.Lead(v.Lead); s != nil {
		rate = s.RateHz
	}
	if len(ps) < 2 || ps[len(ps)-1].TS-ps[0].TS < 1/rate {
		return fmt.Errorf("model: draw along the trace, across at least two samples")
	}
	return m.Edit(record.Correction{Kind: record.CorrRedraw, Lead: v.Lead, Points: ps})
}

// MoveBaseline moves the zero line of panel i's lead down by dy px.
func (m *Model) MoveBaseline(i int, dy float64) error {
	v, err := m.panel(i)
	if err != nil {
		return err
	}
	return m.Edit(record.Correction{Kind: record.CorrBaseline, Lead: v.Lead, OffsetMV: -v.Sign * dy / m.pxPerMV()})
}

// MoveBox sets panel i's box (x0, y0, x1, y1 in rectified px); the
// baseline moves with it and the signals are derived again.
func (m *Model) MoveBox(i int, box [4]float64) error {
	v, err := m.panel(i)
	if err != nil {
		return err
	}
	return m.Edit(record.Correction{Kind: record.CorrBox, Lead: v.Lead, Box: box[:],
		Note: "panel " + strconv.Itoa(i)})
}

// Errors of AddPanel.
var (
	ErrNotLead   = errors.New("model: not a lead name")
	ErrLeadShown = errors.New("model: that lead is on the page already")
)

// MissingLeads returns the standard leads no panel shows now, in the
// standard order: the names a panel drawn by hand may take.
func (m *Model) MissingLeads() []string {
	on := map[string]bool{}
	for _, v := range m.views {
		on[v.Lead] = true
	}
	var out []string
	for _, l := range record.Standard12 {
		if !on[l] {
			out = append(out, l)
		}
	}
	return out
}

// AddPanel says the trace of lead lies in box (x0, y0, x1, y1, rectified
// px): a panel the reader did not find. The lead is traced inside the box
// and joins the record and the measurements. A name that is no standard
// lead, or a lead a panel already shows, is refused and changes nothing;
// "-aVR" names an inverted aVR panel (Cabrera).
func (m *Model) AddPanel(box [4]float64, lead string) error {
	if m.a == nil {
		return errors.New("model: nothing is open")
	}
	name := strings.TrimSpace(lead)
	sign := ""
	if strings.HasPrefix(name, "-") || strings.HasPrefix(name, "−") {
		name = strings.TrimPrefix(strings.TrimPrefix(name, "-"), "−")
		sign = "-"
	}
	name = record.CanonicalLead(strings.TrimSpace(name))
	if !record.IsStandard(name) || (sign != "" && name != record.AVR) {
		return fmt.Errorf("%w: %q; name one of %s (or -aVR for an inverted aVR)", ErrNotLead, strings.TrimSpace(lead), strings.Join(record.Standard12, ", "))
	}
	for _, v := range m.views {
		if v.Lead == name {
			rest := "every standard lead has a panel already"
			if ls := m.MissingLeads(); len(ls) > 0 {
				rest = "the leads without one are " + strings.Join(ls, ", ")
			}
			return fmt.Errorf("%w: %s has its panel at %.1f–%.1f s; %s", ErrLeadShown, name, v.T0S, v.T1S, rest)
		}
	}
	return m.Edit(record.Correction{Kind: record.CorrDrawnPanel, Lead: sign + name, Box: box[:]})
}

// Erased returns the stretches of panel i that an Erase correction made
// gaps, as column ranges [x0, x1] in image px within the panel, so the
// view can draw them as erased rather than as missing ink.
func (m *Model) Erased(i int) [][2]float64 {
	if m.a == nil || i < 0 || i >= len(m.views) {
		return nil
	}
	labels, _ := panelLabels(m.a.Panels)
	var out [][2]float64
	v := m.views[i]
	walk(m.corrs, labels, func(c *record.Correction, cur []string) {
		if c.Kind != record.CorrErase || i >= len(cur) || cur[i] != record.CanonicalLead(c.Lead) {
			return
		}
		t0, t1 := math.Max(c.StartS, v.T0S), math.Min(c.EndS, v.T1S)
		if t1 > t0 {
			out = append(out, [2]float64{m.XAt(i, t0), m.XAt(i, t1)})
		}
	})
	return out
}

// Overlap is a neighbour that a moved box would cover.
type Overlap struct {
	Panel int     // index of the neighbour
	Lead  string  // its lead
	Share float64 // fraction of the neighbour's box covered, 0..1
}

// Overlaps lists the panels other than i that box would cover by at least
// a tenth of their area more than panel i's box covers them now (boxes of
// a printout may touch or overlap a little as printed). The trace under a
// covered stretch would be read into both leads. i = -1 stands for a
// panel about to be drawn (AddPanel): every tenth it covers counts.
func (m *Model) Overlaps(i int, box [4]float64) []Overlap {
	if i < -1 || i >= len(m.views) {
		return nil
	}
	var cur [4]float64
	if i >= 0 {
		cur = m.views[i].Box
	}
	var out []Overlap
	for j, v := range m.views {
		if j == i {
			continue
		}
		area := (v.Box[2] - v.Box[0]) * (v.Box[3] - v.Box[1])
		if !(area > 0) {
			continue
		}
		grow := (overlapArea(box, v.Box) - overlapArea(cur, v.Box)) / area
		if grow >= 0.1 {
			out = append(out, Overlap{Panel: j, Lead: v.Lead, Share: overlapArea(box, v.Box) / area})
		}
	}
	return out
}

func overlapArea(a, b [4]float64) float64 {
	w := math.Min(a[2], b[2]) - math.Max(a[0], b[0])
	h := math.Min(a[3], b[3]) - math.Max(a[1], b[1])
	if w <= 0 || h <= 0 {
		return 0
	}
	return w * h
}

// Assign says panel i shows lead newLead (swapping names with the panel
// that had it).
func (m *Model) Assign(i int, newLead string) error {
	v, err := m.panel(i)
	if err != nil {
		return err
	}
	if record.CanonicalLead(newLead) == v.Lead {
		return nil
	}
	return m.Edit(record.Correction{Kind: record.CorrAssign, Lead: v.Lead, NewLead: record.CanonicalLead(newLead)})
}

// ScaleFromClicks returns the px/mm of the original image implied by two
// points (rectified px) that the user says are mm apart along the time
// axis, for Settings.PxPerMM.
func (m *Model) ScaleFromClicks(x0, y0, x1, y1, mm float64) (float64, error) {
	if m.a == nil {
		return 0, errors.New("model: nothing is open")
	}
	d := math.Hypot(x1-x0, y1-y0)
	if !(mm > 0) || d < 2 {
		return 0, fmt.Errorf("model: pick two grid lines some distance apart and give their distance in mm")
	}
	rectPxPerMM := d / mm
	k := m.a.ImagePxPerMM / m.a.PxPerMM // original px per rectified px
	if !(k > 0) || math.IsInf(k, 0) {
		k = 1
	}
	return rectPxPerMM * k, nil
}
