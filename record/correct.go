package record

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"
)

// Apply returns a copy of raw with the hand corrections applied in order;
// raw is not modified. Apply is pure and deterministic: the same list on
// the same raw record gives a bit-identical result, so an undo is "drop the
// last correction and apply the list again".
//
// The kinds act on the lead named by Correction.Lead (spelling normalised
// by CanonicalLead), in tracing time (seconds) and mV:
//
//   - shift: samples with StartS <= t <= EndS get OffsetMV added.
//   - redraw: samples between the first and last point's time are replaced
//     by the polyline through Points (linear between neighbours; points
//     are taken in time order).
//   - erase: samples with StartS <= t <= EndS become gaps (NaN).
//   - baseline: the lead's zero line moved up by OffsetMV, so every sample
//     drops by OffsetMV.
//   - assign: the lead is renamed NewLead; when NewLead already exists the
//     two leads swap names (the usual case: two panels read the wrong way
//     round).
//   - box: a panel's box moved or resized in the image. Only the digitizer
//     can act on it (it re-derives the signals from the pixel traces before
//     Apply), so Apply checks and records it and leaves the samples alone.
//   - drawn_panel: a panel the reader did not find, drawn by hand (Box,
//     and Lead its name, one of the twelve standard leads, "-aVR" for an
//     inverted one). The digitizer traces it before Apply; Apply checks
//     and records it.
//
// The corrections are appended to the result's Corrections. A correction
// that names a missing lead or carries a bad number is an error naming its
// position in the list.
func Apply(raw *Record, corrs []Correction) (*Record, error) {
	if raw == nil {
		return nil, fmt.Errorf("record: no record to correct")
	}
	out := raw.Clone()
	for i := range corrs {
		if err := applyOne(out, &corrs[i]); err != nil {
			return nil, fmt.Errorf("record: correction %d (%s): %w", i+1, corrs[i].Kind, err)
		}
	}
	out.Corrections = append(out.Corrections, cloneCorrections(corrs)...)
	return out, nil
}

// CheckCorrection reports whether c is well formed on its own (known kind,
// finite numbers, a time span where one is needed), without a record.
func CheckCorrection(c *Correction) error {
	finite := func(vs ...float64) bool {
		for _, v := range vs {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return false
			}
		}
		return true
	}
	if !finite(c.StartS, c.EndS, c.OffsetMV) {
		return fmt.Errorf("a time or offset is not a finite number")
	}
	switch c.Kind {
	case CorrShift, CorrErase:
		if !(c.EndS > c.StartS) {
			return fmt.Errorf("the stretch %.3f–%.3f s is empty", c.StartS, c.EndS)
		}
	case CorrRedraw:
		if len(c.Points) < 2 {
			return fmt.Errorf("a redraw needs at least two points, got %d", len(c.Points))
		}
		for _, p := range c.Points {
			if !finite(p.TS, p.MV) {
				return fmt.Errorf("a redraw point is not a finite number")
			}
		}
	case CorrBaseline:
	case CorrAssign:
		if CanonicalLead(c.NewLead) == "" {
			return fmt.Errorf("no new lead name given")
		}
	case CorrBox:
		if err := checkBox(c.Box); err != nil {
			return err
		}
	case CorrDrawnPanel:
		if err := checkBox(c.Box); err != nil {
			return err
		}
		if !IsStandard(CanonicalLead(strings.TrimLeft(strings.TrimSpace(c.Lead), "-−"))) {
			return fmt.Errorf("%w: %q (want one of %s)", ErrNotLead, c.Lead, strings.Join(Standard12, ", "))
		}
	default:
		return fmt.Errorf("unknown kind %q", c.Kind)
	}
	if CanonicalLead(c.Lead) == "" {
		return fmt.Errorf("no lead named")
	}
	return nil
}

// ErrNotLead is returned for a drawn panel named by no standard lead.
var ErrNotLead = errors.New("not a lead name")

func checkBox(b []float64) error {
	ok := len(b) == 4
	for _, v := range b {
		ok = ok && !math.IsNaN(v) && !math.IsInf(v, 0)
	}
	if !ok || !(b[2] > b[0]) || !(b[3] > b[1]) {
		return fmt.Errorf("a box needs x0 < x1 and y0 < y1 in image px, got %v", b)
	}
	return nil
}

func applyOne(r *Record, c *Correction) error {
	if err := CheckCorrection(c); err != nil {
		return err
	}
	if c.Kind == CorrBox || c.Kind == CorrDrawnPanel {
		return nil
	}
	s := r.Lead(c.Lead)
	if s == nil {
		return fmt.Errorf("%w: %s", ErrNoLead, c.Lead)
	}
	switch c.Kind {
	case CorrShift:
		i0, i1 := s.span(c.StartS, c.EndS)
		for i := i0; i < i1; i++ {
			s.MV[i] += c.OffsetMV
		}
	case CorrErase:
		i0, i1 := s.span(c.StartS, c.EndS)
		for i := i0; i < i1; i++ {
			s.MV[i] = math.NaN()
		}
	case CorrBaseline:
		for i := range s.MV {
			s.MV[i] -= c.OffsetMV
		}
	case CorrRedraw:
		pts := append([]Point(nil), c.Points...)
		sort.SliceStable(pts, func(a, b int) bool { return pts[a].TS < pts[b].TS })
		i0, i1 := s.span(pts[0].TS, pts[len(pts)-1].TS)
		k := 0
		for i := i0; i < i1; i++ {
			t := s.StartS + float64(i)/s.RateHz
			for k < len(pts)-2 && t > pts[k+1].TS {
				k++
			}
			a, b := pts[k], pts[k+1]
			if b.TS == a.TS {
				s.MV[i] = b.MV
				continue
			}
			f := (t - a.TS) / (b.TS - a.TS)
			s.MV[i] = a.MV + f*(b.MV-a.MV)
		}
	case CorrAssign:
		to := CanonicalLead(c.NewLead)
		from := s.Lead
		if other := r.Lead(to); other != nil && other != s {
			other.Lead = from
		}
		s.Lead = to
	}
	return nil
}

// span returns the sample index range [i0, i1) whose times fall in
// [t0, t1], clipped to the signal. A tolerance of a millionth of a sample
// keeps a boundary that lands on a sample from flickering with rounding.
func (s *Signal) span(t0, t1 float64) (int, int) {
	const eps = 1e-6
	n := float64(len(s.MV))
	// Clamp in floating point first so a huge time cannot overflow an int.
	f0 := math.Min(math.Max(math.Ceil((t0-s.StartS)*s.RateHz-eps), 0), n)
	f1 := math.Min(math.Max(math.Floor((t1-s.StartS)*s.RateHz+eps)+1, 0), n)
	i0, i1 := int(f0), int(f1)
	if i1 < i0 {
		i1 = i0
	}
	return i0, i1
}

func cloneCorrections(cs []Correction) []Correction {
	out := make([]Correction, len(cs))
	for i, c := range cs {
		c.Points = append([]Point(nil), c.Points...)
		c.Box = append([]float64(nil), c.Box...)
		out[i] = c
	}
	return out
}
