package digitize

import (
	"image"
	"math"
	"sort"

	"tracelift/calib"
)

// Second opinions on what calibration decided, from what only the traces
// show: which way the rows run (the calibration pulse leads each row) and
// how long the tracing lasts (a 12-lead printout spans 10 s; common
// practice). Where they disagree with calib's result, Run corrects the
// result in place and says so in its Warnings, so that everything drawn
// or re-derived later from the same result agrees with the traces.

// pulseSides counts the rows that start with a calibration pulse at the
// left as the page lies, and those that would if it were turned half a
// turn (the pulse then sits at the right end, upside down).
func pulseSides(g *gray, rows []rowInfo, pitch float64, cal *calib.Result) (left, right int) {
	rg := turnedGray(g)
	for _, r := range rows {
		if ok, _ := squarePulse(g, r.x0, r.base, pitch, cal.PxPerMM, cal.SpeedMMPerS); ok {
			left++
		}
		if ok, _ := squarePulse(rg, g.w-1-r.x1, float64(g.h)-r.base, pitch, cal.PxPerMM, cal.SpeedMMPerS); ok {
			right++
		}
	}
	return left, right
}

// squarePulse reports whether a calibration pulse stands at the start of
// a row beginning near column x0 with baseline base, and its height in
// px: calib's pulse detector (calib.PulsesIn: two upright sides of equal
// extent joined by a flat top, empty inside, the trace leaving along the
// baseline) over the row's first stretch, for a pulse whose foot is on
// the baseline, 100–300 ms wide (common practice: a 200 ms pulse; some
// machines draw it narrower) and at least 2.5 mm tall (a 1 mV pulse at
// 5 mm/mV or more) but lower than the row pitch.
func squarePulse(g *gray, x0 int, base, pitch, pxPerMM, speed float64) (ok bool, heightPx float64) {
	tol := math.Ceil(0.6 * pxPerMM)
	from := max(0, x0-int(5*pxPerMM))
	lim := min(g.w, x0+int((0.35*speed+6)*pxPerMM))
	r := image.Rect(from, max(0, int(base-0.9*pitch)-2), lim, min(g.h, int(base+tol+1.5*pxPerMM)))
	p, ok := g.firstPulse(func(im *image.Gray) []calib.Pulse { return calib.PulsesIn(im, r, pxPerMM, 64) }, func(p calib.Pulse) bool {
		d := p.WidthMM / speed
		return d >= 0.08 && d <= 0.3 && math.Abs(p.Box[3]-base) <= tol && p.HeightMM >= 2.5 && p.HeightMM*pxPerMM <= 0.9*pitch
	})
	if !ok {
		return false, 0
	}
	return true, p.HeightMM * pxPerMM
}

// firstPulse returns the first pulse find reports that keep accepts:
// on the tracer's map first and, where its blur and line removal broke
// a pulse's sides (a fax's), on the ink as calib mapped it (raw).
func (g *gray) firstPulse(find func(*image.Gray) []calib.Pulse, keep func(calib.Pulse) bool) (calib.Pulse, bool) {
	for _, pix := range [][]uint8{g.pix, g.raw} {
		if pix == nil {
			continue
		}
		for _, p := range find(&image.Gray{Pix: pix, Stride: g.w, Rect: image.Rect(0, 0, g.w, g.h)}) {
			if keep(p) {
				return p, true
			}
		}
	}
	return calib.Pulse{}, false
}

// turnedGray returns g turned half a turn (its raw map too).
func turnedGray(g *gray) *gray {
	out := &gray{w: g.w, h: g.h, pix: reversed(g.pix)}
	if g.raw != nil {
		out.raw = reversed(g.raw)
	}
	return out
}

func reversed(p []uint8) []uint8 {
	out := make([]uint8, len(p))
	n := len(p)
	for i, v := range p {
		out[n-1-i] = v
	}
	return out
}

// Trace spans worth snapping to, s: a 10 s page (common practice for a
// 12-lead printout at 25 mm/s). At 50 mm/s a page holds whatever fits.
var pageSpansS = []float64{10}

// maxSpanFix is the largest scale error corrected from the trace span:
// a looser match is more likely a page of another length (printers fit
// 9.7–9.9 s, say, to the paper). 1 %: calib's scale from the pulse and
// the sheet is good to about 0.7 % (its fax sweep, p95), and the span
// from the one-clock fit to a pixel or two.
const maxSpanFix = 0.01

// spanScale returns the factor calib's px/mm is off by, judged from the
// traced span (px) against the standard page durations, with the span
// in seconds at calib's scale and the duration matched; k is 1 when the
// span matches none of them closely, or calib's scale comes from the
// grid (measured over the whole page, closer than a span under
// perspective) or from the user.
func spanScale(spanPx float64, cal *calib.Result) (k, spanS, want float64) {
	spanS = spanPx / (cal.PxPerMM * cal.SpeedMMPerS)
	if cal.Source != "pulse" && cal.Source != "file" && cal.Source != "page" || cal.SpeedMMPerS != 25 {
		return 1, spanS, 0
	}
	for _, w := range pageSpansS {
		r := spanS / w
		// Within 0.1 % (three pixels over a 10 s page at 300 dpi, what
		// the span itself is measured to) nothing is corrected. (0.3 %
		// left a 1x1 strip scaled from its pulse 0.19 % off, 19 ms
		// over its 10 s; bench --cases 100, seeds 1 and 2: faxes 18.5
		// and 15.9 -> 19.0 and 16.9 dB median, all 21.8 and 21.2 -> 21.9
		// and 21.9.)
		if d := math.Abs(r - 1); d <= 0.001 {
			return 1, spanS, w
		} else if d < maxSpanFix {
			return r, spanS, w
		}
	}
	return 1, spanS, 0
}

// Standard gains, mm/mV (common practice: 10, with 5 and 20 the usual
// alternatives and 2.5 or 40 on some machines).
var standardGains = []float64{2.5, 5, 10, 20, 40}

// pulseGain measures the calibration pulses at the starts of the rows
// (a 1 mV pulse; common practice) and returns the standard gain they
// show, or 0 when fewer than two rows show a pulse or their heights
// match no standard gain within 12 %.
func pulseGain(g *gray, rows []rowInfo, pitch float64, cal *calib.Result) float64 {
	var hs []float64
	for _, r := range rows {
		if ok, h := squarePulse(g, r.x0, r.base, pitch, cal.PxPerMM, cal.SpeedMMPerS); ok {
			hs = append(hs, h)
		}
	}
	if len(hs) < 2 {
		return 0
	}
	sort.Float64s(hs)
	mm := hs[len(hs)/2] / cal.PxPerMM
	for _, s := range standardGains {
		if math.Abs(mm-s) < 0.12*s {
			return s
		}
	}
	return 0
}

// isStandardGain reports whether g is within 3 % of a standard gain.
func isStandardGain(g float64) bool {
	for _, s := range standardGains {
		if math.Abs(g-s) <= 0.03*s {
			return true
		}
	}
	return false
}
