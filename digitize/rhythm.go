package digitize

import (
	"math"
	"strings"
)

// nameRhythms names each rhythm strip after the panel it matches over
// that panel's window: the same lead drawn twice matches in shape and in
// size, so the match is the residual of the strip less the panel (means
// removed) relative to the panel's own spread. Correlation alone cannot
// tell II from aVF when the axis lies between them. Strips that match
// nothing keep their default name.
func nameRhythms(panels []Panel, traces []Trace) {
	for i := range panels {
		if !panels[i].Rhythm {
			continue
		}
		best, bestJ, bestSign := math.Inf(1), -1, 1.0
		for j := range panels {
			if panels[j].Rhythm {
				continue
			}
			signs := []float64{1}
			if strings.HasPrefix(panels[j].Lead, "-") {
				signs = append(signs, -1) // Cabrera's −aVR is aVR turned over
			}
			for _, sg := range signs {
				if e := relResidual(traces[i], traces[j], sg); e < best {
					best, bestJ, bestSign = e, j, sg
				}
			}
		}
		// 0.45: a relative residual of 0.45 is a correlation near 0.9
		// for a same-sized lead.
		if bestJ < 0 || best > 0.45 {
			continue
		}
		// The layout's usual lead for this strip (II; II, V1, V5 on
		// 3x4+3: common practice) is kept unless another panel matches
		// clearly better: neighbouring chest leads look alike, and the
		// tracing's own errors can tip the balance between them.
		if e, ok := residualTo(panels, traces, i, panels[i].Lead); ok && e <= 0.45 && e <= best+0.1 {
			continue
		}
		name := panels[bestJ].Lead
		if bestSign < 0 {
			name = strings.TrimPrefix(name, "-")
		}
		panels[i].Lead, traces[i].Lead = name, name
	}
}

// residualTo returns the relative residual between rhythm strip i and
// the panel printed as lead name, false when there is none.
func residualTo(panels []Panel, traces []Trace, i int, name string) (float64, bool) {
	for j := range panels {
		if j != i && !panels[j].Rhythm && panels[j].Lead == name {
			return relResidual(traces[i], traces[j], 1), true
		}
	}
	return 0, false
}

// relResidual is the RMS of a − sign·b over their common columns (means
// removed), relative to b's RMS about its mean; +Inf when they share too
// little.
func relResidual(a, b Trace, sign float64) float64 {
	lo, hi := max(a.X0, b.X0), min(a.X0+len(a.Y), b.X0+len(b.Y))
	var sa, sb, n float64
	for x := lo; x < hi; x++ {
		u, v := a.Y[x-a.X0], b.Y[x-b.X0]
		if math.IsNaN(u) || math.IsNaN(v) {
			continue
		}
		sa += u
		sb += v
		n++
	}
	if n < 10 {
		return math.Inf(1)
	}
	ma, mb := sa/n, sb/n
	var ee, bb float64
	for x := lo; x < hi; x++ {
		u, v := a.Y[x-a.X0], b.Y[x-b.X0]
		if math.IsNaN(u) || math.IsNaN(v) {
			continue
		}
		d := (u - ma) - sign*(v-mb)
		ee += d * d
		bb += (v - mb) * (v - mb)
	}
	if bb <= 0 {
		return math.Inf(1)
	}
	return math.Sqrt(ee / bb)
}
