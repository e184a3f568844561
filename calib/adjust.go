package calib

import (
	"fmt"
	"image"
	"math"
	"runtime"
	"sync"
)

// Some of a page's geometry and settings show only once its traces are
// found: the pulses sit at the rows' right ends (the page is upside down),
// the rows' time origins drift down the page (a turn of a degree is
// left), the traces span 10.05 s where a page holds 10, the row pulses
// are twice as tall as the one calib measured, the page prints its
// speed. The tracer proposes each as an Adjustment, and Result.Apply is
// the one place that carries it out: so the rules for the page's
// geometry and settings live here, whoever finds the evidence.

// Kinds of Adjustment.
const (
	// AdjustHalfTurn: the page is upside down; turn the images half a turn.
	AdjustHalfTurn = "half_turn"
	// AdjustStraighten: a small turn is left; Shear is the drift of the
	// rows' origin per px down the page, turned about Center.
	AdjustStraighten = "straighten"
	// AdjustSpanScale: the traces span SpanS at the present scale where
	// the page holds WantS; every px/mm is multiplied by Factor.
	AdjustSpanScale = "span_scale"
	// AdjustRowPulseGain: the pulses at the row starts show GainMMPerMV.
	AdjustRowPulseGain = "row_pulse_gain"
	// AdjustGainAssumed: the gain read is no standard setting and no row
	// starts with a pulse; the common 10 mm/mV is taken.
	AdjustGainAssumed = "gain_assumed"
	// AdjustPrinted: the page's printed settings read SpeedMMPerS and
	// GainMMPerMV (0 where none was read); TakePrinted's rule decides.
	AdjustPrinted = "printed_settings"
	// AdjustByHand: the user typed the gain and/or speed (0 where not);
	// they replace whatever the page showed.
	AdjustByHand = "by_hand"
)

// Where a page's gain came from (Result.GainFrom).
const (
	GainPulse     = "pulse"      // the calibration pulse calib read
	GainRowPulses = "row_pulses" // the pulses at the starts of the trace rows
	GainPrinted   = "printed"    // the settings printed on the page
	GainStated    = "stated"     // given by the caller or the user
	GainAssumed   = "assumed"    // nothing said: the common 10 mm/mV
)

// An Adjustment is one correction of a Result, with what it rests on.
type Adjustment struct {
	Kind string `json:"kind"`
	// Straighten.
	Shear  float64    `json:"shear,omitempty"`
	Center [2]float64 `json:"center,omitempty"`
	// Span scale.
	Factor float64 `json:"factor,omitempty"`
	SpanS  float64 `json:"span_s,omitempty"`
	WantS  float64 `json:"want_s,omitempty"`
	// Gain and printed settings.
	GainMMPerMV  float64 `json:"gain_mm_per_mv,omitempty"`
	SpeedMMPerS  float64 `json:"speed_mm_per_s,omitempty"`
	PulseAssumed bool    `json:"pulse_assumed,omitempty"`
}

// Clone returns a copy of r that Apply may change without touching r:
// the images are shared (Apply replaces them, it never draws on them),
// the pulses and warnings copied.
func (r *Result) Clone() *Result {
	if r == nil {
		return nil
	}
	c := *r
	c.Pulses = append([]Pulse(nil), r.Pulses...)
	c.Warnings = append([]string(nil), r.Warnings...)
	return &c
}

// Apply carries out a on r, says so in r.Warnings, and reports whether
// anything changed (printed settings that agree with r change nothing).
// An unknown kind changes nothing.
func (r *Result) Apply(a Adjustment) bool {
	switch a.Kind {
	case AdjustHalfTurn:
		r.turnHalf()
	case AdjustStraighten:
		r.straighten(a.Shear, a.Center[0], a.Center[1])
	case AdjustSpanScale:
		if !(a.Factor > 0) || a.Factor == 1 || math.IsInf(a.Factor, 0) {
			return false
		}
		old := r.PxPerMM
		r.PxPerMM *= a.Factor
		r.PxPerMMX *= a.Factor
		r.PxPerMMY *= a.Factor
		r.Warnings = append(r.Warnings, fmt.Sprintf("digitize: the traces span %.2f s at %.3f px/mm; the scale is taken as %.3f px/mm so that they span the standard %.0f s",
			a.SpanS, old, r.PxPerMM, a.WantS))
	case AdjustRowPulseGain:
		if !(a.GainMMPerMV > 0) || a.GainMMPerMV == r.GainMMPerMV {
			return false
		}
		r.Warnings = append(r.Warnings, fmt.Sprintf("digitize: the calibration pulses at the row starts show %g mm/mV (not %g); that gain is used", a.GainMMPerMV, r.GainMMPerMV))
		r.GainMMPerMV, r.GainFrom = a.GainMMPerMV, GainRowPulses
	case AdjustGainAssumed:
		if r.GainMMPerMV == 10 {
			return false
		}
		r.Warnings = append(r.Warnings, fmt.Sprintf("digitize: %.3g mm/mV is not a standard gain and no calibration pulse leads the rows; 10 mm/mV is assumed", r.GainMMPerMV))
		r.GainMMPerMV, r.GainFrom = 10, GainAssumed
	case AdjustPrinted:
		g, s, from, n := r.GainMMPerMV, r.SpeedMMPerS, r.SpeedFrom, len(r.Warnings)
		r.TakePrinted(a.SpeedMMPerS, a.GainMMPerMV, a.PulseAssumed)
		return g != r.GainMMPerMV || s != r.SpeedMMPerS || from != r.SpeedFrom || n != len(r.Warnings)
	case AdjustByHand:
		changed := false
		if g := a.GainMMPerMV; g > 0 && !math.IsInf(g, 0) && g != r.GainMMPerMV {
			r.Warnings = append(r.Warnings, fmt.Sprintf("gain %g mm/mV given by hand is used (the page showed %g mm/mV)", g, r.GainMMPerMV))
			r.GainMMPerMV, r.GainFrom = g, GainStated
			changed = true
		}
		if v := a.SpeedMMPerS; v > 0 && !math.IsInf(v, 0) {
			changed = changed || r.SpeedFrom != SpeedStated
			r.SpeedFrom = SpeedStated // the user's word, not an assumption
			if v != r.SpeedMMPerS {
				r.Warnings = append(r.Warnings, fmt.Sprintf("speed %g mm/s given by hand is used (the page showed %g mm/s)", v, r.SpeedMMPerS))
				r.SpeedMMPerS = v
				changed = true
			}
		}
		return changed
	default:
		return false
	}
	return true
}

// turnHalf turns the rectified page and ink map half a turn and updates
// the quarter-turn count, the map back to the source image and the pulse
// boxes to match.
func (r *Result) turnHalf() {
	var w, h float64
	if r.Rectified != nil {
		w, h = float64(r.Rectified.Rect.Dx()), float64(r.Rectified.Rect.Dy())
		r.Rectified = turnNRGBA(r.Rectified, 2)
	}
	if r.Ink != nil {
		w, h = float64(r.Ink.Rect.Dx()), float64(r.Ink.Rect.Dy())
		r.Ink = turnGray(r.Ink, 2)
	}
	r.Turned = (r.Turned + 2) % 4
	// New rectified (x', y') is old (w − x', h − y'): RectToImage·F with
	// F = [[−1 0 w] [0 −1 h] [0 0 1]].
	m := r.RectToImage
	if m != ([9]float64{}) {
		var o [9]float64
		for i := 0; i < 3; i++ {
			o[3*i+0] = -m[3*i+0]
			o[3*i+1] = -m[3*i+1]
			o[3*i+2] = m[3*i+0]*w + m[3*i+1]*h + m[3*i+2]
		}
		r.RectToImage = o
	}
	for i, p := range r.Pulses {
		b := p.Box
		r.Pulses[i].Box = [4]float64{w - b[2], h - b[3], w - b[0], h - b[1]}
	}
	r.Warnings = append(r.Warnings, "digitize: the calibration pulses sat at the right end of the rows; the page was turned half a turn")
}

// straighten turns the rectified page and ink map by the small angle
// whose tangent is shear (the drift of the rows' origin per px down the
// page) about (xc, yc), updating RectToImage, the pulse boxes and the
// rotation. The new image at (x', y') shows the old one at
// (x' + shear·(y'−yc), y' − shear·(x'−xc)).
func (r *Result) straighten(shear, xc, yc float64) {
	b := shear
	// new → old as an affine map, row-major 3×3.
	m := [9]float64{1, b, -b * yc, -b, 1, b * xc, 0, 0, 1}
	if r.Rectified != nil {
		r.Rectified = warpNRGBA(r.Rectified, m)
	}
	if r.Ink != nil {
		r.Ink = warpGrayAffine(r.Ink, m)
	}
	if q := r.RectToImage; q != ([9]float64{}) {
		var o [9]float64
		for i := 0; i < 3; i++ {
			for j := 0; j < 3; j++ {
				for k := 0; k < 3; k++ {
					o[3*i+j] += q[3*i+k] * m[3*k+j]
				}
			}
		}
		r.RectToImage = o
	}
	// old → new, to first order in b (the error is b² of a page, under
	// a tenth of a pixel for the turns of a degree or so straightened).
	fwd := func(x, y float64) (float64, float64) {
		return x - b*(y-yc), y + b*(x-xc)
	}
	for i, p := range r.Pulses {
		x0, y0 := fwd(p.Box[0], p.Box[1])
		x1, y1 := fwd(p.Box[2], p.Box[3])
		r.Pulses[i].Box = [4]float64{x0, y0, x1, y1}
	}
	deg := math.Atan(b) * 180 / math.Pi
	r.RotationDeg += deg
	r.Warnings = append(r.Warnings, fmt.Sprintf("digitize: the rows' starts and baselines show the page still turned by %.2f°; it was turned straight", -deg))
}

// warpGrayAffine resamples g through the new → old affine map m,
// bilinearly; outside the old image reads as 0 (paper).
func warpGrayAffine(g *image.Gray, m [9]float64) *image.Gray {
	w, h := g.Rect.Dx(), g.Rect.Dy()
	return &image.Gray{Pix: warpBilinear(g.Pix, g.Stride, w, h, 1, 0, m), Stride: w, Rect: image.Rect(0, 0, w, h)}
}

// warpNRGBA is warpGrayAffine for a colour page; outside reads as white.
func warpNRGBA(g *image.NRGBA, m [9]float64) *image.NRGBA {
	w, h := g.Rect.Dx(), g.Rect.Dy()
	return &image.NRGBA{Pix: warpBilinear(g.Pix, g.Stride, w, h, 4, 255, m), Stride: 4 * w, Rect: image.Rect(0, 0, w, h)}
}

// warpBilinear resamples a w × h plane of bpp bytes a pixel through the
// new → old affine map m, with 8-bit bilinear weights; pixels whose
// source falls outside read as fill. Hand-written rather than OpenCV's
// warpAffine so that a straightened page keeps the exact values the
// tracer was tuned on.
func warpBilinear(src []uint8, st, w, h, bpp int, fill uint8, m [9]float64) []uint8 {
	ost := bpp * w
	out := make([]uint8, ost*h)
	parallelRows(h, func(y int) {
		dst := out[y*ost : (y+1)*ost]
		fy := float64(y) + 0.5
		sx := m[0]*0.5 + m[1]*fy + m[2] - 0.5
		sy := m[3]*0.5 + m[4]*fy + m[5] - 0.5
		for x := 0; x < w; x++ {
			d := dst[bpp*x : bpp*x+bpp : bpp*x+bpp]
			px, py := sx+m[0]*float64(x), sy+m[3]*float64(x)
			x0, y0 := int(math.Floor(px)), int(math.Floor(py))
			if x0 < 0 || y0 < 0 || x0+1 >= w || y0+1 >= h {
				for c := range d {
					d[c] = fill
				}
				continue
			}
			wx := int((px - float64(x0)) * 256)
			wy := int((py - float64(y0)) * 256)
			ax, ay := 256-wx, 256-wy
			i := y0*st + bpp*x0
			p0 := src[i : i+2*bpp : i+2*bpp]
			p1 := src[i+st : i+st+2*bpp : i+st+2*bpp]
			for c := range d {
				top := int(p0[c])*ax + int(p0[bpp+c])*wx
				bot := int(p1[c])*ax + int(p1[bpp+c])*wx
				d[c] = uint8((top*ay + bot*wy + 32768) >> 16)
			}
		}
	})
	return out
}

// parallelRows runs f for every row in [0, h) over GOMAXPROCS workers.
func parallelRows(h int, f func(y int)) {
	n := max(1, min(runtime.GOMAXPROCS(0), 8))
	var wg sync.WaitGroup
	for k := 0; k < n; k++ {
		wg.Add(1)
		go func(k int) {
			defer wg.Done()
			for y := k * h / n; y < (k+1)*h/n; y++ {
				f(y)
			}
		}(k)
	}
	wg.Wait()
}
