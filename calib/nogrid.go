package calib

import (
	"context"
	"fmt"
	"math"
	"sort"
)

// withoutGrid: the page is only deskewed by the traces' own direction and
// the scale comes from a calibration pulse or from the user.
func withoutGrid(ctx context.Context, pg *Page, wk *work, theta float64, opt Options) (*Result, error) {
	b := pg.Image.Bounds()
	W, H := float64(b.Dx()), float64(b.Dy())
	// Anisotropic pixels: from the file's resolution, else a landscape
	// page more than 2.2 times wider than tall is taken as a fax at
	// 200 × 100 dpi (a normal-resolution fax, from memory).
	aniso := 1.0
	switch {
	case pg.DPIX > 0 && pg.DPIY > 0:
		aniso = pg.DPIX / pg.DPIY
	case W/H > 2.2 && W/H < 3.4:
		aniso = 2
	}
	if aniso < 0.2 || aniso > 5 {
		aniso = 1
	}
	if t, ok := profileAngle(wk, aniso, 10); ok {
		if wk.trace != nil {
			wk.trace("no grid: profile angle %.3f° (spectrum %.3f°)", t*180/math.Pi, theta*180/math.Pi)
		}
		theta = t
	}
	c, s := math.Cos(theta), math.Sin(theta)
	// Rect px → image px: undo the y stretch, then rotate about the centre.
	Wr, Hr := b.Dx(), int(math.Ceil(H*aniso))
	cxr, cyr := (float64(Wr)-1)/2, (float64(Hr)-1)/2
	cxi, cyi := (W-1)/2, (H-1)/2
	// Build it step by step for clarity: centre, rotate, squash, shift.
	toC := mat3{1, 0, -cxr, 0, 1, -cyr, 0, 0, 1}
	R := mat3{c, -s, 0, s, c, 0, 0, 0, 1}
	sq := mat3{1, 0, 0, 0, 1 / aniso, 0, 0, 0, 1}
	back := mat3{1, 0, cxi, 0, 1, cyi, 0, 0, 1}
	M := back.mul(sq).mul(R).mul(toC)
	if math.Abs(theta) < 1e-4 && aniso == 1 {
		M = ident
	}
	rect, err := warpPage(pg.Image, M, Wr, Hr)
	if err != nil {
		return nil, fmt.Errorf("calib: %s: resampling failed: %v", stem(pg.Path), err)
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	guess := math.Max(float64(Wr), float64(Hr)) / 280 // an A4/letter page seen landscape, about 280 mm wide
	ink, _ := inkMap(rect, gridLines{s: guess})
	if !inkPlausible(ink) {
		return nil, fmt.Errorf("calib: %s: no ECG grid or trace in this picture: %w", stem(pg.Path), ErrNotECG)
	}
	res := &Result{Rectified: rect, Ink: ink, RectToImage: M, RotationDeg: -math.Atan2(math.Sin(theta)/aniso, math.Cos(theta)) * 180 / math.Pi, // as seen in the (squashed) picture
		ScaleAt: [2]float64{cxi, cyi}}
	fileScale := 0.0
	if pg.DPIX > 0 && pg.DPIY > 0 {
		fileScale = pg.DPIX / 25.4 // rect x keeps the file's x resolution
		guess = fileScale          // a better prior for reading the pulse
	}
	// When the paper fills the picture (a fax, a flatbed scan of the whole
	// sheet), the picture's size over the paper's is a scale of its own.
	bilevel, paperBorder := pageLook(pg.Image)
	var pages []float64
	if bilevel || paperBorder {
		pages, _ = pagePrior(float64(Wr), float64(Hr), theta, 0.015)
	}
	if fileScale > 0 {
		pages = append([]float64{fileScale}, pages...)
	}
	user := opt.UserPxPerMM
	if user == 0 && opt.UserDPI > 0 {
		user = opt.UserDPI / 25.4
	}
	var ps []Pulse
	if !opt.ForceUser {
		lo, hi := guess/5, guess*2.5
		if len(pages) > 0 {
			lo, hi = math.Min(lo, pages[0]/1.3), math.Max(hi, pages[0]*1.3)
		}
		ps = findPulses(ink, lo, hi, inkThreshold(ink, ink.Rect), !bilevel && !paperBorder)
		g0 := guess
		if len(pages) > 0 {
			g0 = pages[0]
		}
		if len(pages) > 0 {
			// The sheet's size bounds what can be a pulse: 1 mV at 5 to
			// 20 mm/mV, 200 ms at 12.5 to 50 mm/s, with room for error.
			var keep []Pulse
			for _, p := range ps {
				hmm, wmm := p.HeightMM/pages[0], p.WidthMM/pages[0]
				if hmm >= 3.5 && hmm <= 45 && wmm >= 1.5 && wmm <= 13 {
					keep = append(keep, p)
				}
			}
			ps = keep
		}
		ps = consistentPulses(ps, g0, 10*pulseMV)
	}
	if wk.trace != nil {
		wk.trace("no grid: bilevel %v border %v pages %v (rect %d×%d, aniso %.2f) pulses %d guess %.3f", bilevel, paperBorder, pages, Wr, Hr, aniso, len(ps), guess)
	}
	if len(ps) == 0 && !bilevel && !paperBorder && !opt.ForceUser {
		// A photographed sheet whose outline shows: flattened, its pulses
		// stand upright (on the slanted picture they may lean past
		// reading), and its outline gives the scale failing them.
		if q, ok := sheetQuad(wk); ok {
			if r, ok := fromSheetOnly(pg, wk, q, opt); ok {
				return r, ctx.Err()
			}
		}
	}
	var fit scaleFit
	switch {
	case opt.ForceUser && user > 0:
		res.Source, res.PxPerMM, res.Confidence = "user", user, 0.5
	case user > 0 && len(ps) == 0:
		res.Source, res.PxPerMM, res.Confidence = "user", user, 0.5
		res.Warnings = append(res.Warnings, "no grid or calibration pulse found: the scale given by hand is used")
	case len(ps) > 0:
		hs := make([]float64, len(ps))
		ws := make([]float64, len(ps))
		for i, p := range ps {
			hs[i], ws[i] = p.HeightMM, p.WidthMM
		}
		h, w := median(hs), median(ws)
		// Edges found to about ±0.5 px each, in the picture's own pixels
		// (the height's are aniso rect px tall).
		n := math.Sqrt(float64(len(ps)))
		hErr := math.Max(0.012, 0.7*math.Max(1, aniso)/h/n)
		wErr := math.Max(0.012, 0.7/w/n)
		fit = fuseScale(h, w, hErr, wErr, pages, 0.01, guess, opt)
		if wk.trace != nil {
			wk.trace("pulse h %.2f w %.2f (±%.3f ±%.3f): %+v", h, w, hErr, wErr, fit)
		}
		if fit.paper < 0 && len(pages) > 0 && bilevel {
			// A fax whose "pulse" the sheet's size cannot explain at any
			// standard setting: the sheet is the better witness.
			res.Source, res.PxPerMM, res.Confidence = "page", pages[0], 0.25
			res.Warnings = append(res.Warnings, "no grid found, and what looks like a calibration pulse fits no standard setting at this sheet's size: the scale assumes the fax holds a whole A4 or Letter sheet; check it against a known distance")
			ps = nil
			break
		}
		res.PxPerMM = fit.s
		res.Source = "pulse"
		res.Confidence = math.Min(0.6, 0.3+0.1*float64(len(ps)))
		how := "its height and width"
		if fit.paper >= 0 {
			res.Confidence = math.Min(0.75, res.Confidence+0.15)
			how = "its height and width and the page's size"
			if fit.widthOff {
				how = "its height and the page's size; its width is no 200 ms pulse's"
			}
		}
		res.Warnings = append(res.Warnings, fmt.Sprintf("no grid found: the scale comes from the calibration pulse, read as %.4g mm/mV at %.4g mm/s (the standard settings that best explain %s)", fit.gain, fit.spd, how))
		if !bilevel && !paperBorder {
			// A picture of a sheet (a table or a lid around it): the pulse
			// is measured where it lies, and the sheet may be seen at a
			// slant, so its scale need not hold across the page.
			res.Confidence = math.Min(res.Confidence, 0.3)
			res.Warnings = append(res.Warnings, "the sheet does not fill the picture: if it was photographed at a slant, the pulse gives the scale only near the pulse")
		}
		if fit.paper < 0 && len(pages) > 0 {
			res.Confidence *= 0.6
			res.Warnings = append(res.Warnings, "the calibration pulse and the sheet's size disagree; the pulse is used")
		}
		if fit.margin < 3 {
			res.Confidence *= 0.5
			res.Warnings = append(res.Warnings, "the calibration pulse fits other standard settings almost as well: check the gain, the speed and the scale against the printed settings")
		}
	case user > 0:
		res.Source, res.PxPerMM, res.Confidence = "user", user, 0.5
		res.Warnings = append(res.Warnings, "no grid found: the scale given by hand is used")
	case fileScale > 0:
		res.Source, res.PxPerMM, res.Confidence = "file", fileScale, 0.4
		res.Warnings = append(res.Warnings, fmt.Sprintf("no grid found: the scale comes from the resolution the file states (%.0f×%.0f dpi)", pg.DPIX, pg.DPIY))
	case bilevel && len(pages) > 0:
		// A fax with neither grid nor pulse: the sheet fills the scan.
		res.Source, res.PxPerMM, res.Confidence = "page", pages[0], 0.25
		res.Warnings = append(res.Warnings, "no grid or calibration pulse found: the scale assumes the fax holds a whole A4 or Letter sheet; check it against a known distance")
	case paperBorder && len(pages) > 0:
		// A scan of a whole sheet of plain paper whose pulses cannot be
		// told apart (drawn into one another): its shape is that of a
		// standard sheet, which gives the scale.
		res.Source, res.PxPerMM, res.Confidence = "page", pages[0], 0.2
		res.Warnings = append(res.Warnings, "no grid or calibration pulse found: the scale assumes the scan holds a whole A4 or Letter sheet edge to edge; check it against a known distance")
	default:
		return nil, fmt.Errorf("calib: %s: %w", stem(pg.Path), ErrNoScale)
	}
	res.PxPerMMX, res.PxPerMMY = res.PxPerMM, res.PxPerMM/aniso
	if res.Source == "pulse" && !bilevel && !paperBorder && fit.gain > 0 && fit.spd > 0 {
		// A sheet whose outline shows: its perspective is known, and the
		// page is rectified from it.
		if q, ok := sheetQuad(wk); ok {
			r, ok := fromSheet(pg, wk, q, M, ps, fit.gain, fit.spd, opt)
			if !ok {
				// The pulses as read on the slanted picture make no
				// sheet: read them again on the flattened one.
				r, ok = fromSheetOnly(pg, wk, q, opt)
			}
			if ok {
				if wk.trace != nil {
					wk.trace("sheet %v: %s", q, r.Warnings[0])
				}
				return r, ctx.Err()
			}
		}
		// A sheet photographed at a slant is foreshortened more along one
		// axis than the other: where the pulses stand, their height gives
		// the scale across the traces and their width the scale along.
		// The scale changes across such a sheet, so it is read from one
		// pulse, the one of median height, and reported where it stands.
		order := make([]int, len(ps))
		for i := range order {
			order[i] = i
		}
		sort.Slice(order, func(a, b int) bool { return ps[order[a]].HeightMM < ps[order[b]].HeightMM })
		p := ps[order[(len(ps)-1)/2]]
		res.PxPerMMX = p.WidthMM / (fit.spd * pulseS)
		res.PxPerMMY = p.HeightMM / (fit.gain * pulseMV) / aniso
		x, y := M.apply((p.Box[0]+p.Box[2])/2, (p.Box[1]+p.Box[3])/2)
		res.ScaleAt = [2]float64{x, y}
	}
	if math.Abs(theta) > 0.25 {
		// The page lies across: the squash applies to the rotated frame only
		// approximately; the two scales are reported at the same value
		// ratio as the pixel aspect.
		res.Warnings = append(res.Warnings, "no grid: the scale per axis assumes the page is nearly straight")
	}
	for i := range ps {
		ps[i].HeightMM /= res.PxPerMM
		ps[i].WidthMM /= res.PxPerMM
	}
	res.Pulses = ps
	if res.Source == "pulse" {
		// The pulse's settings came with the scale.
		res.GainMMPerMV, res.SpeedMMPerS, res.SpeedFrom = fit.gain, fit.spd, SpeedPulse
	} else {
		res.GainMMPerMV, res.SpeedMMPerS, res.SpeedFrom, res.Warnings = appendSettings(res.Warnings, ps, opt)
	}
	return res, nil
}

// consistentPulses keeps the largest group of pulses of one height and
// width (the recorder draws the same pulse on every row, at the same x,
// mostly at the row's start), and only
// when that height gives a scale near the page-size guess (within 2.5×).
func consistentPulses(ps []Pulse, guess, gain float64) []Pulse {
	var best []Pulse
	bestScore := 0.0
	for _, p := range ps {
		var grp []Pulse
		xs := map[int]bool{}
		for _, q := range ps {
			if math.Abs(q.HeightMM/p.HeightMM-1) < 0.06 && math.Abs(q.WidthMM/p.WidthMM-1) < 0.2 && q.WidthMM > 0.15*q.HeightMM && q.WidthMM < 2*q.HeightMM {
				grp = append(grp, q)
				xs[int(q.Box[0]/(0.02*guess*280))] = true
			}
		}
		if len(grp) == 0 {
			continue
		}
		// More members, stacked at one x (one per row), and taller (text
		// glyphs are a few mm; a pulse is usually 10 mm) score higher.
		s := (float64(len(grp)) + float64(len(grp)-len(xs))) * math.Log(p.HeightMM)
		// Alike otherwise, the group further left: the pulses lead the rows.
		if len(best) == 0 || s > 1.05*bestScore || (s > bestScore/1.05 && medianLeft(grp) < medianLeft(best)) {
			best, bestScore = grp, s
		}
	}
	if len(best) == 0 {
		return nil
	}
	hs := make([]float64, len(best))
	for i, p := range best {
		hs[i] = p.HeightMM
	}
	ppm := median(hs) / gain
	if ppm < guess/5 || ppm > guess*5 {
		return nil
	}
	return best
}

// medianLeft is the median left edge of a group of pulses.
func medianLeft(ps []Pulse) float64 {
	xs := make([]float64, len(ps))
	for i, p := range ps {
		xs[i] = p.Box[0]
	}
	return median(xs)
}
