package digitize

import (
	"math"
	"sort"

	"tracelift/calib"
)

// page holds what every hypothesis shares.
type page struct {
	g           *gray
	rows        []rowInfo
	pitch       float64
	x0, x1      int       // the common trace span of the rows
	x0f         float64   // the first sample's position, continuous px
	rowX0       []float64 // per row, the first sample's position, continuous px (one clock: see timeBase)
	span        float64   // px from the first sample to the last, the same in every row
	shear       float64   // d(row origin x)/dy from the time base fit
	shearFitted bool      // shear was fitted (three or more rows' ends agree)
	pxPerS      float64
	halfLn      float64
	pxPerMM     float64
	t0From      string // how time 0 was found (T0First, T0Span, T0Fall)
}

func newPage(g *gray, rows []rowInfo, cal *calib.Result) *page {
	pg := &page{g: g, rows: rows, pxPerMM: cal.PxPerMM, pxPerS: cal.PxPerMM * cal.SpeedMMPerS}
	pg.pitch = rowPitch(rows, g, cal.PxPerMM)
	pg.halfLn = strokeHalfWidth(g, rows, cal.PxPerMM)
	var starts, ends, falls, rises []int
	var mg *gray
	for i := range rows {
		r := &rows[i]
		var fall int
		r.x0, fall = pulseEndFall(g, r.x0, r.x1, r.base, pg.pitch, cal.PxPerMM, cal.SpeedMMPerS, cal.GainMMPerMV)
		if fall < 0 {
			// calib may have seen this row's pulse where the row's own
			// search did not (a photocopy's noise along its lead-in).
			if x, ok := calibPulseEnd(cal.Pulses, r.base, pg.pitch, r.x1); ok {
				fall = x
				r.x0 = max(r.x0, x+1)
			}
		}
		// A pulse may stand at the row's right end instead: the same
		// search on the page mirrored left to right finds it.
		rise := -1
		if fall < 0 {
			if mg == nil {
				mg = mirrored(g)
			}
			if mx0, mfall := pulseEndFall(mg, g.w-1-r.x1, g.w-1-r.x0, r.base, pg.pitch, cal.PxPerMM, cal.SpeedMMPerS, cal.GainMMPerMV); mfall >= 0 {
				rise = g.w - 1 - mfall
				r.x1 = min(r.x1, g.w-1-mx0)
			}
		}
		starts = append(starts, r.x0)
		ends = append(ends, r.x1)
		falls = append(falls, fall)
		rises = append(rises, rise)
	}
	sort.Ints(starts)
	sort.Ints(ends)
	// The trace's first sample sits half a line width inside its ink.
	pg.x0f = startEdge(g, rows, starts[len(starts)/2]) + pg.halfLn
	pg.x0 = int(math.Round(pg.x0f))
	pg.x1 = ends[len(ends)/2] + 1 - int(math.Round(pg.halfLn))
	if pg.x1 <= pg.x0+8 {
		pg.x1 = min(g.w, pg.x0+8)
	}
	pg.span = float64(pg.x1) - pg.x0f
	pg.rowX0 = make([]float64, len(rows))
	for i := range pg.rowX0 {
		pg.rowX0[i] = pg.x0f
	}
	// One clock for the page, from every row's trace ends.
	marks := make([]rowMarks, len(rows))
	// The round cap at a trace's end is one disc of the pen: its radius
	// is the thinnest stretch's half width (noise and slope only thicken
	// a line down a column), not the typical one.
	capHW := strokeHalfWidthQ(g, rows, 0.05, cal.PxPerMM)
	// The coarse extents err outward at the ends (specks within 3 mm
	// of the trace join it) and inward at the starts (a pulse's lead-out
	// is skipped with the gap): the shortest of them is the safe guard.
	startRef := starts[len(starts)-1]
	endRef := ends[0]
	// A grid line left in the working map carries a row's coarse extent
	// to the grid's edge; where the rows' strong ink ends is the safer
	// guard then.
	for _, r := range rows {
		endRef = min(endRef, strongEnd(g, r, pg.pitch))
	}
	// Pulses found in two rows or more guard the starts, and so does one
	// row's when calib saw pulses on the page; otherwise one row's alone
	// may be a wave taken for a pulse, and guards only its own row.
	minFall, nFall := math.MaxInt, 0
	for _, f := range falls {
		if f >= 0 {
			minFall = min(minFall, f)
			nFall++
		}
	}
	if nFall < 2 && len(cal.Pulses) == 0 {
		minFall = math.MaxInt
	}
	for i, r := range rows {
		marks[i] = measureRow(g, r, pg.pitch, cal.PxPerMM, falls[i], rises[i], capHW, startRef, endRef)
		// The pulses stand before time 0 in every row: a start found left
		// of another row's pulse is a walk along something else (a pulse
		// not recognised in this row, a label, the margin).
		if minFall != math.MaxInt && marks[i].start <= float64(minFall) {
			marks[i].okStart = false
		}
	}
	labelPieces(marks, cal.PxPerMM)
	pg.t0From = hiddenStarts(marks, pg.halfLn, cal.PxPerMM, cal.PxPerMM*cal.SpeedMMPerS)
	tol := math.Max(1.5, 0.3*cal.PxPerMM)
	if x0s, L, b, fitted, ok := timeBase(rows, marks, tol); ok && L > 8 {
		pg.rowX0, pg.span = x0s, L
		pg.shear, pg.shearFitted = b, fitted
		pg.x0f = median(x0s)
		pg.x0 = int(math.Round(pg.x0f))
		pg.x1 = int(math.Round(pg.x0f + L))
	} else {
		// No clock from both ends (the traces run to the picture's edge,
		// say): the starts the walks found still beat the coarse extents,
		// which a wave leaving the row's band cuts short.
		var ss []float64
		for _, m := range marks {
			if m.okStart {
				ss = append(ss, m.start)
			}
		}
		if len(ss) > 0 {
			x1 := pg.x0f + pg.span
			pg.x0f = median(ss)
			pg.x0 = int(math.Round(pg.x0f))
			pg.span = x1 - pg.x0f
			for i := range pg.rowX0 {
				pg.rowX0[i] = pg.x0f
			}
		}
	}
	return pg
}

// mirrored returns g mirrored left to right.
func mirrored(g *gray) *gray {
	m := &gray{w: g.w, h: g.h, pix: make([]uint8, len(g.pix))}
	if g.raw != nil {
		m.raw = make([]uint8, len(g.raw))
	}
	for y := 0; y < g.h; y++ {
		row := y * g.w
		for x := 0; x < g.w; x++ {
			m.pix[row+g.w-1-x] = g.pix[row+x]
			if g.raw != nil {
				m.raw[row+g.w-1-x] = g.raw[row+x]
			}
		}
	}
	return m
}
