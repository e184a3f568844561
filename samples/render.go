package samples

import (
	"errors"
	"fmt"
	"image"
	"image/color"
	"math"
	"strings"

	"tracelift/record"
)

// Panel is one drawn lead window.
type Panel struct {
	Lead        string     // as labelled: a standard name, or "-aVR" for inverted aVR
	Row, Col    int        // grid position; rhythm strips continue the row count
	Rhythm      bool       // a rhythm strip across the page
	Box         [4]float64 // x0, y0, x1, y1 in clean-render px: the time span across, the row's band down
	T0S, T1S    float64    // time window on the tracing clock
	BaselineYPx float64    // y of 0 mV in clean-render px
}

// Truth is what a printout holds, for scoring a digitization.
type Truth struct {
	Layout      Layout
	Cabrera     bool
	SpeedMMPerS float64
	GainMMPerMV float64
	// PxPerMMX and PxPerMMY are the scales of the FINAL image along the
	// paper's time and amplitude axes (at the page centre when the
	// page is seen in perspective).
	PxPerMMX, PxPerMMY float64
	RotationDeg        float64      // page rotation in the final image, counter-clockwise positive
	Panels             []Panel      // clean-render px
	Pulses             [][4]float64 // pulse boxes x0 (rise), y0 (top), x1 (fall), y1 (baseline), clean-render px
	// Signals holds what was drawn per lead on the tracing clock: each
	// signal's StartS and length are the lead's visible window (for a
	// lead drawn both as a panel and as a rhythm strip, the strip's
	// window). Leads keep their true polarity and standard names: a
	// panel labelled "-aVR" drew −1 × the "aVR" signal here.
	Signals *record.Record
	// PageToImage maps clean-render px (x, y, 1) to final-image px,
	// row-major 3×3 homography; identity for a clean render.
	PageToImage [9]float64
	Condition   string
	// CleanPxPerMM is the clean render's scale (both axes), the unit of
	// Panels, Pulses and the input side of PageToImage.
	CleanPxPerMM float64

	// RowT0XPx is, per row (index = Panel.Row), the x in clean-render px
	// of the tracing's time 0 on that row: where a joined pulse's falling
	// edge meets the trace, or where the trace starts after a gap.
	RowT0XPx []float64
	// PulsePlace and PulseJoined say how the pulses were printed
	// (PulseJoined is false when no pulse was printed).
	PulsePlace  PulsePlace
	PulseJoined bool
	// Strip is true for strip paper without margins.
	Strip bool
	// Bend, when not nil, is a non-planar warp of the paper applied
	// before PageToImage: use ToImage to map clean-render px to the image.
	Bend *Bend
	// Marks are the boxes (clean-render px) of stamps and handwriting
	// laid over the page, with their kind ("stamp", "pen").
	Marks []Mark
	// Washed are boxes (final-image px) of spots washed out by glare.
	Washed [][4]float64
	// FileDPIX and FileDPIY are the resolution the picture's file
	// declares (0 when it declares none); a fax may carry 204 × 98.
	FileDPIX, FileDPIY float64
	// PageIndex is the 0-based page of the ECG in a multi-page file and
	// PageCount the file's pages (1 for a single picture).
	PageIndex, PageCount int
}

// Mark is a stamp or a pen mark over the page.
type Mark struct {
	Kind string     // "stamp" or "pen"
	Box  [4]float64 // x0, y0, x1, y1 in clean-render px
}

// ToImage maps a clean-render point to the final image: the bend of the
// paper first (when there is one), then PageToImage.
func (t Truth) ToImage(x, y float64) (float64, float64) {
	if t.Bend != nil {
		x, y = t.Bend.Forward(x, y)
	}
	return Apply(t.PageToImage, x, y)
}

// Printout is an image with its truth.
type Printout struct {
	Image *image.NRGBA
	Truth Truth
	// Cover, when not nil, is a fax cover sheet sent before the ECG page
	// (Truth.PageIndex says where the ECG page stands in the file).
	Cover *image.NRGBA
	// Encoded, when not nil, holds the file the picture was decoded
	// from (a chat app's JPEG), byte for byte.
	Encoded []byte
}

// Identity is the identity homography.
var Identity = [9]float64{1, 0, 0, 0, 1, 0, 0, 0, 1}

// Errors.
var (
	ErrNoSignal = errors.New("samples: record has none of the leads the layout draws")
	ErrTooShort = errors.New("samples: record is too short to draw from the start time")
)

type panelPlan struct {
	lead   string // label
	source string // record lead
	invert bool
	row    int
	col    int
	rhythm bool
	t0, t1 float64
	d0, d1 float64 // blanks left undrawn at the window's start and end, s
}

// plan lays the leads out in rows and columns with their time windows.
// colDur is one column's duration; strips span all columns.
func plan(st Style, ncolsOut *int) (rows int, panels []panelPlan) {
	limb := []string{"I", "II", "III", "aVR", "aVL", "aVF"}
	if st.Cabrera {
		limb = []string{"aVL", "I", "-aVR", "II", "aVF", "III"}
	}
	prec := []string{"V1", "V2", "V3", "V4", "V5", "V6"}
	all := append(append([]string{}, limb...), prec...)
	add := func(label string, row, col int, rhythm bool) {
		src, inv := label, false
		if label == "-aVR" {
			src, inv = "aVR", true
		}
		panels = append(panels, panelPlan{lead: label, source: src, invert: inv, row: row, col: col, rhythm: rhythm})
	}
	var ncols int
	switch st.Layout {
	case Layout3x4R1, Layout3x4R3:
		ncols = 4
		for c := 0; c < 4; c++ {
			for r := 0; r < 3; r++ {
				add(all[3*c+r], r, c, false)
			}
		}
		rows = 3
		n := 1
		if st.Layout == Layout3x4R3 {
			n = 3
		}
		for i := 0; i < n && i < len(st.RhythmLeads); i++ {
			add(record.CanonicalLead(st.RhythmLeads[i]), 3+i, 0, true)
			rows++
		}
	case Layout6x2:
		ncols = 2
		for c := 0; c < 2; c++ {
			for r := 0; r < 6; r++ {
				add(all[6*c+r], r, c, false)
			}
		}
		rows = 6
	case Layout12x1:
		ncols = 1
		for r, l := range all {
			add(l, r, 0, false)
		}
		rows = 12
	case Layout1x1:
		ncols = 1
		add(record.CanonicalLead(st.RhythmLeads[0]), 0, 0, false)
		rows = 1
	}
	*ncolsOut = ncols
	return rows, panels
}

// geometry in mm.
type geom struct {
	pxmm            float64
	traceX0         float64 // mm, left edge of the first panel
	colW            float64 // mm per column
	colDur          float64 // s per column
	rowTop, rowH    float64 // mm
	pulseX          float64 // mm, rise of the pulses
	headerY         float64 // mm, baseline of the header text
	gridX0, gridY0  float64 // mm, grid rectangle
	gridX1, gridY1  float64
	gridOX, gridOY  float64 // mm, a 5 mm crossing
	rows, ncols     int
	widthPx, heigPx int
}

func layoutGeom(st Style, dur float64, rows, ncols int) (geom, error) {
	var g geom
	g.pxmm = st.DPI / 25.4
	g.widthPx = int(math.Round(st.PaperWMM * g.pxmm))
	g.heigPx = int(math.Round(st.PaperHMM * g.pxmm))
	mL, mT, mR, mB := st.MarginsMM[0], st.MarginsMM[1], st.MarginsMM[2], st.MarginsMM[3]
	pulseW, rightW := 0.0, 0.0
	pw := st.PulseMS / 1000 * st.SpeedMMPerS
	if st.Pulses {
		switch st.PulsePlace {
		case PulseGapLeft:
			pulseW = pw + 4 // 1.5 mm lead-in, pulse, 2.5 mm gap
		case PulseJoinedLeft:
			pulseW = pw + 1.5 // 1.5 mm lead-in, pulse; the trace leaves its falling edge
		case PulseGapRight:
			rightW = 2.5 + pw + 1.5 // gap, pulse, lead-out
		case PulseJoinedRight:
			rightW = 1 + pw + 1.5 // 1 mm of baseline, pulse, lead-out
		}
	}
	g.pulseX = mL + 1.5
	g.traceX0 = mL + pulseW
	avail := st.PaperWMM - mR - rightW - g.traceX0
	total := math.Min(10, dur)
	if lim := avail / st.SpeedMMPerS; lim < total {
		total = lim
	}
	// Whole hundredths of a second per column.
	g.colDur = math.Floor(total/float64(ncols)*100) / 100
	if g.colDur < 0.2 {
		return g, fmt.Errorf("samples: paper %v mm wide leaves %.2f s per column at %v mm/s; too little to draw", st.PaperWMM, g.colDur, st.SpeedMMPerS)
	}
	g.colW = g.colDur * st.SpeedMMPerS
	head := 0.0
	if (st.Header != "" || st.Labels) && !st.Strip {
		head = st.LabelPt*0.3528*1.2 + 2 // a line of text in mm (1 pt = 0.3528 mm) and a gap
	}
	g.headerY = mT + st.LabelPt*0.3528
	if st.Strip {
		g.headerY = st.LabelPt*0.3528 + 1 // inside the grid, 1 mm below the top edge
	}
	g.rowTop = mT + head
	g.rowH = (st.PaperHMM - mB - g.rowTop) / float64(rows)
	if g.rowH < 5 {
		return g, fmt.Errorf("samples: %d rows do not fit on paper %v mm high", rows, st.PaperHMM)
	}
	g.rows, g.ncols = rows, ncols
	g.gridX0, g.gridY0 = mL, g.rowTop
	g.gridX1, g.gridY1 = st.PaperWMM-mR, st.PaperHMM-mB
	g.gridOX = g.traceX0 + st.GridOriginMM[0]
	g.gridOY = g.rowTop + st.GridOriginMM[1]
	return g, nil
}

// Render draws rec on paper in style st and returns the image with its
// truth. Leads missing from rec leave their panels blank.
func Render(rec *record.Record, st Style) (*Printout, error) {
	if rec == nil {
		return nil, errors.New("samples: nil record")
	}
	if err := rec.Validate(); err != nil {
		return nil, fmt.Errorf("samples: %w", err)
	}
	st, err := st.withDefaults()
	if err != nil {
		return nil, err
	}
	var ncols int
	rows, plans := plan(st, &ncols)
	dur := recordEnd(rec) - st.StartS
	if dur < 0.5 {
		return nil, ErrTooShort
	}
	g, err := layoutGeom(st, dur, rows, ncols)
	if err != nil {
		return nil, err
	}
	img := image.NewNRGBA(image.Rect(0, 0, g.widthPx, g.heigPx))
	fillNRGBA(img, st.PaperColor)
	drawGrid(img, st, g)
	if st.GridBorder && st.Grid != GridNone {
		e := math.Max(st.MajorLineMM, 0.15) * g.pxmm
		bx0, by0 := g.gridX0*g.pxmm+e/2, g.gridY0*g.pxmm+e/2
		bx1, by1 := g.gridX1*g.pxmm-e/2, g.gridY1*g.pxmm-e/2
		newInker(img, st.GridColor, e).polyline([]float64{bx0, bx1, bx1, bx0, bx0}, []float64{by0, by0, by1, by1, by0})
	}

	tr := Truth{
		Layout: st.Layout, Cabrera: st.Cabrera, SpeedMMPerS: st.SpeedMMPerS, GainMMPerMV: st.GainMMPerMV,
		PxPerMMX: g.pxmm, PxPerMMY: g.pxmm, CleanPxPerMM: g.pxmm, PageToImage: Identity, Condition: "clean",
		PageCount: 1,
		Signals:   &record.Record{Name: rec.Name},
	}
	tr.Signals.Provenance = record.Provenance{
		PxPerMMX: g.pxmm, PxPerMMY: g.pxmm, GainMMPerMV: st.GainMMPerMV, SpeedMMPerS: st.SpeedMMPerS,
		Layout: string(st.Layout), Software: "tracelift samples (truth)",
	}
	ink := newInker(img, st.TraceColor, st.TraceWidthMM*g.pxmm)
	if st.Pen != PenRound || st.PenJitterMM > 0 || st.InkSpreadMM > 0 {
		ink.useLayer(st.Pen == PenButt, st.PenJitterMM*g.pxmm, st.Seed)
	}
	mmToPx := func(mm float64) float64 { return mm * g.pxmm }
	pxPerS := st.SpeedMMPerS * g.pxmm
	pxPerMV := st.GainMMPerMV * g.pxmm
	tr.PulsePlace = st.PulsePlace
	tr.PulseJoined = st.Pulses && st.PulsePlace.Joined()
	tr.Strip = st.Strip
	for r := 0; r < rows; r++ {
		tr.RowT0XPx = append(tr.RowT0XPx, mmToPx(g.traceX0))
	}

	// Header and labels first, so the traces draw over them.
	txt := newTexter(st)
	if (st.Header != "" || st.Labels) && (!st.Strip || st.Header != "") {
		h := st.Header
		var settings string
		switch st.SettingsForm {
		case 1:
			settings = fmt.Sprintf("%gmm/s  %gmm/mV", st.SpeedMMPerS, st.GainMMPerMV)
		case 2:
			settings = fmt.Sprintf("%g mm/mV  %g mm/s", st.GainMMPerMV, st.SpeedMMPerS)
		default:
			settings = fmt.Sprintf("%g mm/s   %g mm/mV", st.SpeedMMPerS, st.GainMMPerMV)
		}
		if h != "" {
			h += "     "
		}
		x := st.MarginsMM[0]
		if st.Strip {
			x = 1.5
		}
		txt.draw(img, mmToPx(x), mmToPx(g.headerY), strings.TrimSpace(h+settings), st.TraceColor)
	}

	want := map[string][2]float64{} // source lead -> window (strip wins)
	wantStrip := map[string]bool{}
	lastCol := map[int]int{} // row -> index of its last panel
	// Pulse polylines, joined to the trace or not, per panel index.
	prefix := map[int][2][]float64{}
	suffix := map[int][2][]float64{}
	pw := st.PulseMS / 1000 * pxPerS
	for i := range plans {
		p := &plans[i]
		if p.rhythm {
			p.t0, p.t1 = 0, g.colDur*float64(ncols)
		} else {
			p.t0 = g.colDur * float64(p.col)
			p.t1 = p.t0 + g.colDur
		}
		if j, ok := lastCol[p.row]; !ok || plans[j].col < p.col {
			lastCol[p.row] = i
		}
	}
	for i := range plans {
		p := &plans[i]
		x0 := mmToPx(g.traceX0 + g.colW*float64(p.col))
		x1 := x0 + (p.t1-p.t0)*pxPerS
		y0 := mmToPx(g.rowTop + g.rowH*float64(p.row))
		base := mmToPx(g.rowTop + g.rowH*(float64(p.row)+0.58))
		tr.Panels = append(tr.Panels, Panel{
			Lead: p.lead, Row: p.row, Col: p.col, Rhythm: p.rhythm,
			Box: [4]float64{x0, y0, x1, y0 + mmToPx(g.rowH)}, T0S: p.t0, T1S: p.t1, BaselineYPx: base,
		})
		top := base - pxPerMV
		lead := mmToPx(1.5)
		if p.col == 0 && st.Pulses && !st.PulsePlace.Right() {
			// Flat lead-in, 1 mV pulse, then a flat lead-out or the trace.
			xr := mmToPx(g.pulseX)
			xf := xr + pw
			if st.PulsePlace == PulseJoinedLeft {
				prefix[i] = [2][]float64{{xr - lead, xr, xr, xf, xf}, {base, base, top, top, base}}
			} else {
				ink.polyline([]float64{xr - lead, xr, xr, xf, xf, xf + lead},
					[]float64{base, base, top, top, base, base})
			}
			tr.Pulses = append(tr.Pulses, [4]float64{xr, top, xf, base})
		}
		if lastCol[p.row] == i && st.Pulses && st.PulsePlace.Right() {
			xEnd := mmToPx(g.traceX0 + g.colW*float64(g.ncols))
			if st.PulsePlace == PulseJoinedRight {
				xr := xEnd + mmToPx(1)
				xf := xr + pw
				suffix[i] = [2][]float64{{xr, xr, xf, xf, xf + lead}, {base, top, top, base, base}}
				tr.Pulses = append(tr.Pulses, [4]float64{xr, top, xf, base})
			} else {
				xr := xEnd + mmToPx(2.5)
				xf := xr + pw
				ink.polyline([]float64{xr - lead, xr, xr, xf, xf, xf + lead},
					[]float64{base, base, top, top, base, base})
				tr.Pulses = append(tr.Pulses, [4]float64{xr, top, xf, base})
			}
		}
		if st.Labels {
			drawLabel(img, txt, st, g, p.lead, p.col, x0, base)
		}
		if st.Separators && p.col > 0 && !p.rhythm {
			switch st.Boundary {
			case BoundaryTick:
				h := mmToPx(2.5)
				ink.polyline([]float64{x0, x0}, []float64{base - h, base + h})
			case BoundaryTall:
				ink.polyline([]float64{x0, x0}, []float64{y0 + mmToPx(0.15*g.rowH), y0 + mmToPx(0.9*g.rowH)})
			}
		}
		// What is drawn of the window: a boundary gap takes half its
		// blank from each side of a column join.
		if st.Separators && st.Boundary == BoundaryGap && !p.rhythm {
			gap := st.BoundaryGapMS / 1000 / 2
			if p.col > 0 {
				p.d0 = gap
			}
			if p.col < ncols-1 {
				p.d1 = gap
			}
		}
		w := [2]float64{p.t0 + p.d0, p.t1 - p.d1}
		if p.rhythm {
			want[p.source] = w
			wantStrip[p.source] = true
		} else if _, ok := want[p.source]; !ok {
			want[p.source] = w
		}
	}
	drawn := 0
	for i, p := range plans {
		s := rec.Lead(p.source)
		pre, suf := prefix[i], suffix[i]
		if s == nil || len(s.MV) == 0 {
			ink.polyline(pre[0], pre[1])
			ink.polyline(suf[0], suf[1])
			continue
		}
		pn := tr.Panels[i]
		sign := 1.0
		if p.invert {
			sign = -1
		}
		xs := append([]float64(nil), pre[0]...)
		ys := append([]float64(nil), pre[1]...)
		i0, i1 := sampleRange(s, st.StartS+p.t0+p.d0, st.StartS+p.t1-p.d1)
		for k := i0; k < i1; k++ {
			v := s.MV[k]
			if math.IsNaN(v) {
				ink.polyline(xs, ys)
				xs, ys = xs[:0], ys[:0]
				continue
			}
			tau := s.StartS + float64(k)/s.RateHz - st.StartS
			xs = append(xs, pn.Box[0]+(tau-p.t0)*pxPerS)
			ys = append(ys, pn.BaselineYPx-sign*v*pxPerMV)
		}
		if len(suf[0]) > 0 {
			if len(xs) > 0 {
				// Down to the baseline where the trace ends, then along it.
				xs = append(xs, xs[len(xs)-1])
				ys = append(ys, pn.BaselineYPx)
			}
			xs = append(xs, suf[0]...)
			ys = append(ys, suf[1]...)
		}
		ink.polyline(xs, ys)
		if i1 > i0 {
			drawn++
		}
	}
	ink.finish(st.Pen == PenThermal, st.InkSpreadMM*g.pxmm, g.pxmm)
	if drawn == 0 {
		return nil, ErrNoSignal
	}
	// Truth signals in standard order first, then any other names.
	var order []string
	seen := map[string]bool{}
	for _, l := range record.Standard12 {
		if _, ok := want[l]; ok {
			order = append(order, l)
			seen[l] = true
		}
	}
	for _, p := range plans {
		if !seen[p.source] {
			order = append(order, p.source)
			seen[p.source] = true
		}
	}
	for _, l := range order {
		s := rec.Lead(l)
		if s == nil {
			continue
		}
		w := want[l]
		i0, i1 := sampleRange(s, st.StartS+w[0], st.StartS+w[1])
		if i1 <= i0 {
			continue
		}
		tr.Signals.Signals = append(tr.Signals.Signals, record.Signal{
			Lead: s.Lead, RateHz: s.RateHz,
			StartS: s.StartS + float64(i0)/s.RateHz - st.StartS,
			MV:     append([]float64(nil), s.MV[i0:i1]...),
		})
	}
	return &Printout{Image: img, Truth: tr}, nil
}

// sampleRange returns the sample indices of s whose times fall in
// [t0, t1) on the record's clock.
func sampleRange(s *record.Signal, t0, t1 float64) (int, int) {
	i0 := int(math.Ceil((t0-s.StartS)*s.RateHz - 1e-9))
	i1 := int(math.Ceil((t1-s.StartS)*s.RateHz - 1e-9))
	i0 = max(0, min(i0, len(s.MV)))
	i1 = max(i0, min(i1, len(s.MV)))
	return i0, i1
}

func recordEnd(rec *record.Record) float64 {
	e := math.Inf(-1)
	for i := range rec.Signals {
		e = math.Max(e, rec.Signals[i].EndS())
	}
	return e
}

func fillNRGBA(img *image.NRGBA, c color.NRGBA) {
	row := img.Pix[:img.Rect.Dx()*4]
	for i := 0; i < len(row); i += 4 {
		row[i], row[i+1], row[i+2], row[i+3] = c.R, c.G, c.B, c.A
	}
	for y := 1; y < img.Rect.Dy(); y++ {
		copy(img.Pix[y*img.Stride:], row)
	}
}
