package calib

import (
	"image"
	"image/color"
	"math"
	"sort"
)

// Paper sizes seen landscape, long × short side in mm: A4 (ISO 216) and
// US Letter (ANSI/ASME Y14.1), the two sizes ECG recorders print on
// (common practice).
var paperSizes = [][2]float64{{297, 210}, {279.4, 215.9}}

// pagePrior is the scale a picture implies when the paper fills it (a fax
// or a flatbed scan of the whole sheet): the picture's long side over the
// paper's. Wr × Hr is the picture in isotropic px, theta the page's skew.
// A scanner or fax crops a skewed sheet to its scan width, while a picture
// taken of the sheet grows around it, so both readings are tried. It
// returns the candidate scales (one per paper size whose outline fits to
// tol), best fit first, and how well the best one fits (relative aspect
// error).
func pagePrior(Wr, Hr, theta, tol float64) ([]float64, float64) {
	c, s := math.Cos(theta), math.Abs(math.Sin(theta))
	type cand struct{ long, short float64 }
	cands := []cand{{math.Max(Wr, Hr), math.Min(Wr, Hr)}}
	if d := c*c - s*s; d > 0.5 && s > 1e-4 {
		// The sheet's own sides inside a canvas grown around it.
		a := (Wr*c - Hr*s) / d
		b := (Hr*c - Wr*s) / d
		cands = append(cands, cand{math.Max(a, b), math.Min(a, b)})
	}
	type fit struct{ scale, err float64 }
	var fits []fit
	for _, ps := range paperSizes {
		bestE, bestS := math.Inf(1), 0.0
		for _, cd := range cands {
			if cd.short <= 0 {
				continue
			}
			e := math.Abs(math.Log((cd.long / cd.short) / (ps[0] / ps[1])))
			if e < bestE {
				// Both sides measure the scale; their mean halves the
				// error of either.
				bestE, bestS = e, math.Sqrt(cd.long/ps[0]*cd.short/ps[1])
			}
		}
		if bestE <= tol {
			fits = append(fits, fit{bestS, bestE})
		}
	}
	sort.Slice(fits, func(i, j int) bool { return fits[i].err < fits[j].err })
	out := make([]float64, len(fits))
	for i, f := range fits {
		out[i] = f.scale
	}
	if len(fits) == 0 {
		return nil, math.Inf(1)
	}
	return out, fits[0].err
}

// pageLook samples the picture: whether it is bilevel (a fax: nearly
// every pixel black or white) and whether its border is paper (bright all
// round, no table or scanner lid in a dark tone around the sheet).
func pageLook(img image.Image) (bilevel, paperBorder bool) {
	b := img.Bounds()
	W, H := b.Dx(), b.Dy()
	if W < 16 || H < 16 {
		return false, false
	}
	grey := func(x, y int) uint8 {
		return color.GrayModel.Convert(img.At(b.Min.X+x, b.Min.Y+y)).(color.Gray).Y
	}
	step := max(1, int(math.Sqrt(float64(W*H)/20000)))
	mid, n := 0, 0
	for y := step / 2; y < H; y += step {
		for x := (y / step) % step; x < W; x += step {
			v := grey(x, y)
			n++
			if v > 12 && v < 243 {
				mid++
			}
		}
	}
	bilevel = n > 0 && float64(mid) < 0.005*float64(n)
	// Border: a band 1 % in from each edge.
	var vs []int
	ix, iy := W/100, H/100
	for x := 0; x < W; x += max(1, W/200) {
		vs = append(vs, int(grey(x, iy)), int(grey(x, H-1-iy)))
	}
	for y := 0; y < H; y += max(1, H/200) {
		vs = append(vs, int(grey(ix, y)), int(grey(W-1-ix, y)))
	}
	sort.Ints(vs)
	paperBorder = len(vs) > 0 && vs[len(vs)/4] >= 200
	return bilevel, paperBorder
}

// scaleFit is the answer of fuseScale.
type scaleFit struct {
	s         float64 // px/mm
	gain, spd float64
	paper     int     // index into the page prior's candidates used, -1 for none
	margin    float64 // log-likelihood lead of the best hypothesis over the runner-up
	relErr    float64 // expected relative error of s (1 σ)
	widthOff  bool    // the pulse's width was taken as no 200 ms pulse's, so it did not count
}

// fuseScale reads the scale from calibration pulses without a grid. Each
// hypothesis (a standard gain, a standard speed and, when the paper fills
// the picture, a paper size) predicts the scale three ways — the pulse's
// height over the gain, its width over 200 ms at the speed, and the
// picture's size over the paper's — and the hypothesis whose predictions
// agree best (weighted by how finely each is measured) wins; the scale is
// their weighted mean. h and w are the pulse's median height and width
// in rect px, hErr and wErr their expected relative errors; pages are
// the page-size scales (none when the paper does not fill the picture)
// and guess a loose prior on the scale (an A4 page spanning the picture).
// Priors: 10 mm/mV and 25 mm/s are the standard (Kligfield et al. 2007);
// the weights of the others are from memory.
func fuseScale(h, w, hErr, wErr float64, pages []float64, pageErr, guess float64, opt Options) scaleFit {
	gains := []float64{10, 5, 20}
	gp := []float64{0.7, 0.15, 0.15}
	speeds := []float64{25, 50}
	sp := []float64{0.85, 0.15}
	if opt.StatedGainMMPerMV > 0 {
		gains, gp = []float64{opt.StatedGainMMPerMV}, []float64{1}
	}
	if opt.StatedSpeedMMPerS > 0 {
		speeds, sp = []float64{opt.StatedSpeedMMPerS}, []float64{1}
	}
	type obs struct{ v, sig float64 }
	type hyp struct {
		L float64
		f scaleFit
	}
	var hs []hyp
	pidx := []int{-1}
	for i := range pages {
		pidx = append(pidx, i)
	}
	// The pulse lasts the common 200 ms, or it is one of the narrower
	// steps some carts draw (100–160 ms, from memory): then its width
	// says nothing of the scale, and its height and the sheet decide
	// (only where the sheet fills the picture).
	widthSays := []bool{true, false}
	wp := []float64{0.9, 0.1}
	for i, g := range gains {
		for j, v := range speeds {
			for _, pi := range pidx {
				for wi, ws := range widthSays {
					if !ws && pi < 0 {
						// Without the sheet, the height alone would read the
						// scale: too weak a witness.
						continue
					}
					os := []obs{{math.Log(h / (g * pulseMV)), hErr}}
					if ws {
						os = append(os, obs{math.Log(w / (pulseS * v)), wErr})
					}
					lp := math.Log(gp[i] * sp[j] * wp[wi])
					if pi >= 0 {
						os = append(os, obs{math.Log(pages[pi]), pageErr})
						// A paper size other than the best-fitting one is less
						// likely.
						lp += math.Log(0.8 / float64(1+pi))
					} else if len(pages) > 0 {
						// The paper fills the picture but is not the sheet the
						// trace was printed on (a cropped or reduced copy):
						// possible, unlikely.
						lp += math.Log(0.05)
					}
					var sw, swv float64
					for _, o := range os {
						wt := 1 / (o.sig * o.sig)
						sw += wt
						swv += wt * o.v
					}
					m := swv / sw
					L := lp
					for _, o := range os {
						d := (o.v - m) / o.sig
						L -= d * d / 2
					}
					// The loose page-size guess (an A4 page across the picture
					// within a factor of about 1.3).
					dg := math.Log(math.Exp(m)/guess) / 0.3
					L -= dg * dg / 2
					hs = append(hs, hyp{L, scaleFit{s: math.Exp(m), gain: g, spd: v, paper: pi, relErr: 1 / math.Sqrt(sw), widthOff: !ws}})
				}
			}
		}
	}
	sort.Slice(hs, func(i, j int) bool { return hs[i].L > hs[j].L })
	best := hs[0].f
	best.margin = math.Inf(1)
	// The lead over the likeliest hypothesis that reads the page
	// differently (another gain, speed or a scale 5 % away).
	for _, o := range hs[1:] {
		if o.f.gain != best.gain || o.f.spd != best.spd || math.Abs(math.Log(o.f.s/best.s)) > 0.05 {
			best.margin = hs[0].L - o.L
			break
		}
	}
	return best
}

// profileAngle deskews a page without a grid by its traces' baselines and
// its lines of text: the ink's projection across the page is sharpest
// (the sum of squared bin counts is largest) when the projection runs
// along them (projection-profile skew estimation, as in document image
// analysis, e.g. Postl 1986). aniso is the work image's x/y pixel aspect;
// the angle is in the squashed-back (isotropic) frame, radians, positive
// when the baselines run down to the right, within ±maxDeg.
func profileAngle(wk *work, aniso, maxDeg float64) (float64, bool) {
	var xs, ys []float32
	for y := 0; y < wk.h; y++ {
		row := wk.dmax[y*wk.w : (y+1)*wk.w]
		for x, v := range row {
			if v > 128 {
				xs = append(xs, float32(x))
				ys = append(ys, float32(float64(y)*aniso))
			}
		}
	}
	n := len(xs)
	if n < 500 || n > wk.w*wk.h/5 {
		return 0, false
	}
	if step := n / 60000; step > 1 {
		k := 0
		for i := 0; i < n; i += step {
			xs[k], ys[k] = xs[i], ys[i]
			k++
		}
		xs, ys, n = xs[:k], ys[:k], k
	}
	bin := math.Max(1, aniso)
	H := float64(wk.h)*aniso + float64(wk.w)
	nb := int(2*H/bin) + 4
	bins := make([]float32, nb)
	score := func(th float64) float64 {
		clear(bins)
		s, c := math.Sin(th), math.Cos(th)
		fs, fc := float32(-s/bin), float32(c/bin)
		off := float32(H / bin)
		for i := range xs {
			j := int(fs*xs[i] + fc*ys[i] + off)
			if j >= 0 && j < nb {
				bins[j]++
			}
		}
		var q float64
		for _, v := range bins {
			q += float64(v) * float64(v)
		}
		return q
	}
	best, bestQ := 0.0, -1.0
	stepDeg := 0.1
	for d := -maxDeg; d <= maxDeg+1e-9; d += stepDeg {
		if q := score(d * math.Pi / 180); q > bestQ {
			best, bestQ = d, q
		}
	}
	q0 := score(best*math.Pi/180 + 3*math.Pi/180)
	// Refine by halving steps around the best.
	for st := stepDeg / 2; st >= 0.005; st /= 2 {
		for _, d := range []float64{best - st, best + st} {
			if q := score(d * math.Pi / 180); q > bestQ {
				best, bestQ = d, q
			}
		}
	}
	// A page with little straight ink gives no clear peak.
	if bestQ < 1.15*q0 {
		return 0, false
	}
	return best * math.Pi / 180, true
}
