package digitize

import (
	"image"
	"math"

	"tracelift/calib"
)

// pulseEndFall returns the first column right of any calibration pulse
// at the left of a row starting at x0 around baseline base: a pair of
// vertical strokes at least 0.6 mV tall, 100–300 ms apart, within the
// first stretch of the row (common practice: a 1 mV, 200 ms square
// pulse), and the last column of the pulse's falling stroke. It returns
// x0 and −1 when none is found.
func pulseEndFall(g *gray, x0, x1 int, base, pitch, pxPerMM, speed, gain float64) (int, int) {
	if x, fall := pulseEndFallAt(g, x0, x1, base, pitch, pxPerMM, speed, gain, 64); fall >= 0 {
		return x, fall
	}
	// A pulse drawn with a thinner line than the trace keeps less of its
	// ink through the blur: look again with strokes counted from a fifth
	// of the trace's usual strength (the median over the row of the
	// column maximum).
	core := medianColMax(g, x0, x1, max(0, int(base-0.3*pitch)), min(g.h, int(base+0.3*pitch)))
	if core < 0 {
		return x0, -1
	}
	on := uint8(min(64, max(20, core/5)))
	if on >= 64 {
		return x0, -1
	}
	return pulseEndFallAt(g, x0, x1, base, pitch, pxPerMM, speed, gain, on)
}

func pulseEndFallAt(g *gray, x0, x1 int, base, pitch, pxPerMM, speed, gain float64, on uint8) (int, int) {
	tall := 0.6 * gain * pxPerMM
	ya, yb := max(0, int(base-0.9*pitch)), min(g.h, int(base+0.4*pitch))
	// The pulse's flat top may sit outside the band the row's span was
	// found in, so look from a pulse's width left of x0 too.
	from := max(0, x0-int((0.3*speed+3)*pxPerMM))
	lim := min(x1, x0+int((0.35*speed+6)*pxPerMM))
	// calib's pulse detector where a pulse is expected
	// (calib.PulsesAtRowStart) over the row's first stretch, on the maps
	// firstPulse looks at; a pulse stands on the baseline with nothing
	// running along it between its sides (openFoot: not a lead's name
	// printed on the baseline).
	r := image.Rect(from, ya, lim, yb)
	p, ok := g.firstPulse(func(im *image.Gray) []calib.Pulse { return calib.PulsesAtRowStart(im, r, pxPerMM, on) }, func(p calib.Pulse) bool {
		d := p.WidthMM / speed
		return d >= 0.08 && d <= 0.3 && p.HeightMM*pxPerMM >= tall && math.Abs(p.Box[3]-base) <= 0.2*pitch &&
			openFoot(g, int(p.Box[0])+2, int(p.Box[2])-2, int(math.Round(base)), 1, on)
	})
	if !ok {
		return x0, -1
	}
	fall := int(p.Box[2])
	return leadOut(g, x0, x1, fall, base, pitch, pxPerMM, ya, yb), fall
}

// leadOut returns the first column of the trace right of a pulse whose
// falling stroke ends at column fall: past the flat lead-out to the
// first gap, then over the gap.
func leadOut(g *gray, x0, x1, fall int, base, pitch, pxPerMM float64, ya, yb int) int {
	// Skip the flat lead-out after the fall to the first gap.
	x := fall + 1
	for x < x1 && x < fall+int(4*pxPerMM) {
		inked := false
		for y := max(0, int(base-0.15*pitch)); y < min(g.h, int(base+0.15*pitch)); y++ {
			if g.pix[y*g.w+x] >= 64 {
				inked = true
				break
			}
		}
		if !inked {
			break
		}
		x++
	}
	inkedAt := func(x int) bool {
		for y := ya; y < yb; y++ {
			if g.pix[y*g.w+x] >= 64 {
				return true
			}
		}
		return false
	}
	// Over the gap to the trace: the first of three inked columns
	// in a row (a leftover grid line is narrower).
	for x+2 < x1 && !(inkedAt(x) && inkedAt(x+1) && inkedAt(x+2)) {
		x++
	}
	return max(x, x0)
}

// openFoot reports whether the columns between a pulse's strokes at
// columns a and b stay clear of ink in rows y±slack in at least half of
// them: a pulse rises from the baseline and falls back to it with
// nothing running along the baseline between its strokes, while a
// lead's name printed on the baseline ("II" with its serifs, whose
// stems and joined top pass for a pulse's) has the trace running
// beneath it.
func openFoot(g *gray, a, b, y, slack int, on uint8) bool {
	n, f := 0, 0
	for x := a + 2; x < b-1; x++ {
		n++
		for yy := max(0, y-slack); yy <= min(g.h-1, y+slack); yy++ {
			if g.pix[yy*g.w+x] >= on {
				f++
				break
			}
		}
	}
	return 2*f < n
}

// calibPulseEnd returns the last column of a pulse calib found standing
// on the baseline base (its foot within a fifth of the pitch) left of
// the middle of a row that ends at x1, false when there is none.
func calibPulseEnd(ps []calib.Pulse, base, pitch float64, x1 int) (int, bool) {
	for _, p := range ps {
		b := p.Box
		if math.Abs(b[3]-base) <= 0.2*pitch && b[1] < base && b[2] < float64(x1)/2 {
			return int(math.Floor(b[2])), true
		}
	}
	return 0, false
}
