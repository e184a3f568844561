package digitize

import (
	"context"
	"math"
	"strings"

	"tracelift/record"
)

// segTrace is one row segment's trace.
type segTrace struct {
	x0   int
	y    []float64
	conf []float32
	// join is the trace across the boundary at the segment's left end
	// (nil for the first): a rhythm strip runs on unbroken where the
	// rows above change lead, and its trace fills the margins kept
	// clear of separator ticks there.
	join *segTrace
}

// segBounds returns the column edges of n equal segments of row r's
// span, in continuous px: every row runs on the page's one clock, from
// its own origin.
func (pg *page) segBounds(n, r int) []float64 {
	out := make([]float64, n+1)
	colPx := pg.span / float64(n)
	// Snap to 2.5 s per column of a 10 s page when the measured span is
	// that to within 0.2 % (common practice; pages of 9.7–9.9 s are
	// common too, so a looser snap would misplace every column).
	if n > 1 {
		if d := 10.0 / float64(n) * pg.pxPerS; math.Abs(colPx-d) < 0.002*d {
			colPx = d
		}
	}
	x0 := pg.x0f
	if r >= 0 && r < len(pg.rowX0) {
		x0 = pg.rowX0[r]
	}
	for i := range out {
		out[i] = x0 + float64(i)*colPx
	}
	out[n] = math.Max(out[n], x0+pg.span)
	return out
}

// rowBand is the band the path of row is followed in over columns
// [x0, x1): the row's baseline ± 0.95 of the row pitch.
func (pg *page) rowBand(row rowInfo, x0, x1 int) band {
	return band{x0: x0, x1: x1, home: row.base, pitch: pg.pitch, halfLine: math.Max(pg.halfLn, 1),
		y0: max(0, int(row.base-0.95*pg.pitch)), y1: min(pg.g.h, int(row.base+0.95*pg.pitch))}
}

func (pg *page) traceRows(ctx context.Context, n int) ([][]segTrace, error) {
	margin := int(math.Ceil(pg.halfLn + 0.3*pg.pxPerMM)) // clear of separator ticks at a boundary
	out := make([][]segTrace, len(pg.rows))
	edges := make([][]*pathEdges, len(pg.rows))
	for r, row := range pg.rows {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		out[r] = make([]segTrace, n)
		edges[r] = make([]*pathEdges, n)
		xs := pg.segBounds(n, r)
		for s := 0; s < n; s++ {
			a, b := int(math.Round(xs[s])), int(math.Round(xs[s+1]))
			if s == n-1 {
				b = min(pg.g.w, int(math.Ceil(xs[s+1]))+1) // the column holding the last sample
			}
			ta, tb := a, b
			if s > 0 {
				ta += margin
			}
			if s < n-1 {
				tb -= margin
			}
			edges[r][s] = followPath(pg.g, pg.rowBand(row, ta, min(tb, pg.g.w)))
			st := segTrace{x0: a, y: make([]float64, b-a), conf: make([]float32, b-a)}
			for i := range st.y {
				st.y[i] = math.NaN()
			}
			out[r][s] = st
		}
	}
	// One pen drew the page: its radius is fitted to every trace's
	// strokes at once.
	var all []*pathEdges
	for _, es := range edges {
		for _, e := range es {
			if e != nil {
				all = append(all, e)
			}
		}
	}
	R := fitPenRadius(all, math.Max(pg.halfLn, 1))
	// The stretches across each boundary, with 1 mm of trace either side
	// of the margins to follow the line in and out.
	ctxPx := int(math.Ceil(pg.pxPerMM))
	for r, row := range pg.rows {
		xs := pg.segBounds(n, r)
		for s := 1; s < n; s++ {
			a := int(math.Round(xs[s]))
			bd := pg.rowBand(row, max(0, a-margin-ctxPx), min(pg.g.w, a+margin+ctxPx+1))
			e := followPath(pg.g, bd)
			if e == nil {
				continue
			}
			ys, cf := e.finish(R)
			j := &segTrace{x0: bd.x0, y: make([]float64, len(ys)), conf: cf}
			for i := range ys {
				j.y[i] = ys[i] + 0.5
			}
			out[r][s].join = j
		}
	}
	for r := range edges {
		for s, e := range edges[r] {
			if e == nil {
				continue
			}
			ys, cf := e.finish(R)
			st := out[r][s]
			for i := range ys {
				j := e.b.x0 - st.x0 + i // the band starts margin px into the segment
				if j >= 0 && j < len(st.y) {
					st.y[j] = ys[i] + 0.5 // pixel index to continuous coordinates
					st.conf[j] = cf[i]
				}
			}
		}
	}
	return out, nil
}

// fillJoin fills the blanks of trace tr from the trace j across a
// segment boundary.
func fillJoin(tr *Trace, j *segTrace) {
	if j == nil {
		return
	}
	for k, v := range j.y {
		i := j.x0 + k - tr.X0
		if i >= 0 && i < len(tr.Y) && math.IsNaN(tr.Y[i]) && !math.IsNaN(v) {
			tr.Y[i], tr.Conf[i] = v, j.conf[k]
		}
	}
}

// fillEdge fills the blanks at one end of trace tr (dir −1 its start,
// +1 its end) from the trace j across the boundary there, when j meets
// tr within tol px at tr's last traced column before the blanks.
func fillEdge(tr *Trace, j *segTrace, dir int, tol float64) {
	if j == nil || len(tr.Y) == 0 {
		return
	}
	// The last traced column, walking from the end inwards.
	i := 0
	if dir > 0 {
		i = len(tr.Y) - 1
	}
	for i >= 0 && i < len(tr.Y) && math.IsNaN(tr.Y[i]) {
		i -= dir
	}
	if i < 0 || i >= len(tr.Y) || i == 0 && dir < 0 || i == len(tr.Y)-1 && dir > 0 {
		return
	}
	k := i + tr.X0 - j.x0
	if k < 0 || k >= len(j.y) || math.IsNaN(j.y[k]) || math.Abs(j.y[k]-tr.Y[i]) > tol {
		return
	}
	// The fill stops where the trace across the boundary jumps by more
	// than tol from one column to the next: it has run onto a separator
	// tick or the next panel's lead.
	prev := tr.Y[i]
	for i += dir; i >= 0 && i < len(tr.Y) && math.IsNaN(tr.Y[i]); i += dir {
		k := i + tr.X0 - j.x0
		if k < 0 || k >= len(j.y) || math.IsNaN(j.y[k]) || math.Abs(j.y[k]-prev) > tol {
			return
		}
		tr.Y[i], tr.Conf[i] = j.y[k], j.conf[k]
		prev = j.y[k]
	}
}

// assemble builds the panels and traces of hypothesis h from row
// segments traced in nseg equal parts.
func (pg *page) assemble(h hypothesis, segs [][]segTrace, nseg int, override []string, fill bool) ([]Panel, []Trace) {
	names, prow, pcol, rhythm := leadGrid(h)
	ncols := layoutCols(h.layout)
	per := nseg / ncols
	colDur := (pg.segBounds(nseg, -1)[per] - pg.x0f) / pg.pxPerS
	var panels []Panel
	var traces []Trace
	for i, name := range names {
		r := prow[i]
		if r >= len(segs) {
			continue
		}
		s0, s1 := pcol[i]*per, (pcol[i]+1)*per
		if rhythm[i] {
			s0, s1 = 0, nseg
		}
		xs := pg.segBounds(nseg, r)
		bx0, bx1 := xs[s0], xs[s1]
		base := pg.rows[r].base
		tr := Trace{Lead: name, Panel: len(panels), X0: segs[r][s0].x0}
		for s := s0; s < s1; s++ {
			tr.Y = append(tr.Y, segs[r][s].y...)
			tr.Conf = append(tr.Conf, segs[r][s].conf...)
		}
		// Within a panel the lead runs on across segment boundaries (a
		// rhythm strip across the columns' too): the traces across them
		// fill the margins kept clear of separator ticks. At the panel's
		// own edges the trace across the boundary fills up to the
		// boundary where it meets the panel's trace.
		if fill {
			for s := s0 + 1; s < s1; s++ {
				fillJoin(&tr, segs[r][s].join)
			}
			tol := math.Max(2, 0.3*pg.pxPerMM)
			if s0 > 0 {
				fillEdge(&tr, segs[r][s0].join, -1, tol)
			}
			if s1 < nseg {
				fillEdge(&tr, segs[r][s1].join, +1, tol)
			}
		}
		if b := modeY(tr.Y); !math.IsNaN(b) {
			base = b
		}
		t0 := float64(pcol[i]) * colDur
		t1 := t0 + (bx1-bx0)/pg.pxPerS
		if rhythm[i] {
			t0, t1 = 0, (bx1-bx0)/pg.pxPerS
		}
		panels = append(panels, Panel{
			Lead: name, Row: r, Col: pcol[i], Rhythm: rhythm[i],
			Box: [4]float64{bx0, base - 0.58*pg.pitch, bx1, base + 0.42*pg.pitch},
			T0S: t0, T1S: t1, BaselineY: base,
		})
		traces = append(traces, tr)
	}
	nameRhythms(panels, traces)
	if len(override) > 0 {
		for i := range panels {
			if i < len(override) && strings.TrimSpace(override[i]) != "" {
				n := strings.TrimSpace(override[i])
				if !strings.HasPrefix(n, "-") {
					n = record.CanonicalLead(n)
				}
				panels[i].Lead, traces[i].Lead = n, n
			}
		}
	}
	return panels, traces
}
