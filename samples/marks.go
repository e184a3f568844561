package samples

import (
	"image"
	"image/color"
	"math"
	"math/rand"
)

// Invented stamp wording: no real place or person.
var stampWords = [][]string{
	{"RECEIVED", "WARD 3"},
	{"REVIEWED"},
	{"COPY"},
	{"SEEN", "DR ON CALL"},
	{"FILED", "OUTREACH"},
	{"URGENT"},
}

var stampColors = []color.NRGBA{
	{200, 30, 40, 215},  // red
	{120, 40, 160, 215}, // violet
	{170, 20, 90, 200},  // magenta red
}

var penColors = []color.NRGBA{
	{20, 45, 170, 220}, // blue ballpoint
	{30, 30, 120, 210}, // dark blue
	{10, 90, 190, 200}, // light blue gel
}

// addMarks lays n stamps and pen marks over the panels of a clean render
// (clean-render px) and returns their boxes.
func addMarks(img *image.NRGBA, tr Truth, n int, rng *rand.Rand) []Mark {
	var out []Mark
	if len(tr.Panels) == 0 {
		return nil
	}
	pxmm := tr.CleanPxPerMM
	for i := 0; i < n; i++ {
		pn := tr.Panels[rng.Intn(len(tr.Panels))]
		// Somewhere over the panel's trace.
		cx := pn.Box[0] + (pn.Box[2]-pn.Box[0])*(0.1+0.8*rng.Float64())
		cy := pn.BaselineYPx + pxmm*(rng.Float64()*10-6)
		if rng.Intn(2) == 0 {
			out = append(out, Mark{Kind: "stamp", Box: stamp(img, cx, cy, pxmm, rng)})
		} else {
			out = append(out, Mark{Kind: "pen", Box: penMark(img, cx, cy, pxmm, rng)})
		}
	}
	return out
}

// stamp prints a framed, slightly turned rubber stamp with patchy ink
// centred at (cx, cy) and returns its box.
func stamp(img *image.NRGBA, cx, cy, pxmm float64, rng *rand.Rand) [4]float64 {
	words := stampWords[rng.Intn(len(stampWords))]
	pt := 10 + 8*rng.Float64()
	st := Style{LabelPt: pt, DPI: pxmm * 25.4, Font: FontBold}
	txt := newTexter(st)
	lineH := pt * 0.3528 * pxmm * 1.25
	wmax := 0.0
	for _, w := range words {
		wmax = math.Max(wmax, txt.width(w))
	}
	pad := 2.5 * pxmm
	w := int(wmax + 2*pad)
	h := int(float64(len(words))*lineH + 2*pad)
	// Draw in a small black-on-white picture, then lay its darkness on
	// the page turned and patchy.
	small := image.NewNRGBA(image.Rect(0, 0, w, h))
	fillNRGBA(small, color.NRGBA{255, 255, 255, 255})
	ink := newInker(small, color.NRGBA{0, 0, 0, 255}, 0.5*pxmm)
	e := 0.6 * pxmm
	ink.polyline([]float64{e, float64(w) - e, float64(w) - e, e, e}, []float64{e, e, float64(h) - e, float64(h) - e, e})
	e2 := 1.4 * pxmm
	ink2 := newInker(small, color.NRGBA{0, 0, 0, 255}, 0.2*pxmm)
	ink2.polyline([]float64{e2, float64(w) - e2, float64(w) - e2, e2, e2}, []float64{e2, e2, float64(h) - e2, float64(h) - e2, e2})
	for k, word := range words {
		x := (float64(w) - txt.width(word)) / 2
		txt.draw(small, x, pad+float64(k+1)*lineH-0.25*lineH, word, color.NRGBA{0, 0, 0, 255})
	}
	c := stampColors[rng.Intn(len(stampColors))]
	a := (rng.Float64() - 0.5) * 0.5 // up to about ±14°
	ca, sa := math.Cos(a), math.Sin(a)
	patch := 0.25 + 0.35*rng.Float64()
	// A coarse noise field for the patchy ink.
	const cell = 6
	nw, nh := w/cell+2, h/cell+2
	noise := make([]float64, nw*nh)
	for i := range noise {
		noise[i] = rng.Float64()
	}
	r := math.Hypot(float64(w), float64(h)) / 2
	b := img.Rect
	for y := int(cy - r); y <= int(cy+r); y++ {
		if y < b.Min.Y || y >= b.Max.Y {
			continue
		}
		for x := int(cx - r); x <= int(cx+r); x++ {
			if x < b.Min.X || x >= b.Max.X {
				continue
			}
			dx, dy := float64(x)+0.5-cx, float64(y)+0.5-cy
			u, v := dx*ca+dy*sa+float64(w)/2, -dx*sa+dy*ca+float64(h)/2
			iu, iv := int(u), int(v)
			if u < 0 || v < 0 || iu >= w || iv >= h {
				continue
			}
			d := 255 - float64(small.Pix[iv*small.Stride+4*iu])
			if d == 0 {
				continue
			}
			f := 1 - patch*noise[(iv/cell)*nw+iu/cell]
			i := img.PixOffset(x, y)
			blendPx(img.Pix[i:i+4], c, uint32(d*f*float64(c.A)/255))
		}
	}
	return [4]float64{cx - r, cy - r, cx + r, cy + r}
}

// penMark writes a line of cursive-looking loops, sometimes with an
// underline or a ring, in ballpoint blue, starting near (cx, cy).
func penMark(img *image.NRGBA, cx, cy, pxmm float64, rng *rand.Rand) [4]float64 {
	c := penColors[rng.Intn(len(penColors))]
	ink := newInker(img, c, (0.3+0.3*rng.Float64())*pxmm)
	minX, minY, maxX, maxY := cx, cy, cx, cy
	grow := func(xs, ys []float64) {
		for i := range xs {
			minX, maxX = math.Min(minX, xs[i]), math.Max(maxX, xs[i])
			minY, maxY = math.Min(minY, ys[i]), math.Max(maxY, ys[i])
		}
	}
	if rng.Intn(3) == 0 {
		// A ring around part of the trace.
		rx, ry := (6+10*rng.Float64())*pxmm, (5+6*rng.Float64())*pxmm
		var xs, ys []float64
		for k := 0; k <= 80; k++ {
			t := 2*math.Pi*float64(k)/72 + 0.3
			wob := 1 + 0.04*math.Sin(3*t)
			xs = append(xs, cx+rx*wob*math.Cos(t))
			ys = append(ys, cy+ry*wob*math.Sin(t))
		}
		ink.polyline(xs, ys)
		grow(xs, ys)
		return [4]float64{minX, minY, maxX, maxY}
	}
	// Words: trochoid loops of varying height, a small gap between words.
	x := cx - 20*pxmm
	slant := 0.3 * rng.Float64()
	for w := 0; w < 2+rng.Intn(3); w++ {
		var xs, ys []float64
		nl := 3 + rng.Intn(5)
		r := (1 + 1.2*rng.Float64()) * pxmm
		for k := 0; k <= nl*16; k++ {
			t := 2 * math.Pi * float64(k) / 16
			hgt := r * (1 + 0.6*math.Sin(0.7*t+float64(w)))
			yy := cy - hgt*(1-math.Cos(t))
			xx := x + 0.55*r*t - 0.9*r*math.Sin(t) + slant*(cy-yy)
			xs = append(xs, xx)
			ys = append(ys, yy)
		}
		ink.polyline(xs, ys)
		grow(xs, ys)
		x = xs[len(xs)-1] + (2+2*rng.Float64())*pxmm
	}
	if rng.Intn(2) == 0 {
		xs := []float64{cx - 20*pxmm, x}
		ys := []float64{cy + 1.5*pxmm, cy + 1.5*pxmm + (rng.Float64()-0.5)*2*pxmm}
		ink.polyline(xs, ys)
		grow(xs, ys)
	}
	return [4]float64{minX, minY, maxX, maxY}
}

// coverSheet draws a fax cover page: W × H px at pxmm, with invented
// sender and addressee and a ruled note box, in black on white.
func coverSheet(W, H int, pxmm float64, rng *rand.Rand) *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, W, H))
	fillNRGBA(img, color.NRGBA{255, 255, 255, 255})
	black := color.NRGBA{0, 0, 0, 255}
	big := newTexter(Style{LabelPt: 28, DPI: pxmm * 25.4, Font: FontBold})
	small := newTexter(Style{LabelPt: 11, DPI: pxmm * 25.4, Font: rng.Intn(2)})
	mm := func(v float64) float64 { return v * pxmm }
	big.draw(img, mm(20), mm(30), []string{"FAX", "FACSIMILE", "Fax cover sheet"}[rng.Intn(3)], black)
	lines := []string{
		"To: Heart tracing reading desk (fictional)",
		"From: " + headers[rng.Intn(len(headers)-1)],
		"Pages: 2 including this sheet",
		"Re: resting 12-lead ECG, synthetic, not a patient",
		"Please call back if any page is unreadable.",
	}
	for i, l := range lines {
		small.draw(img, mm(20), mm(50+9*float64(i)), l, black)
	}
	ink := newInker(img, black, mm(0.4))
	y0, y1 := mm(100), mm(170)
	ink.polyline([]float64{mm(18), float64(W) - mm(18), float64(W) - mm(18), mm(18), mm(18)}, []float64{y0, y0, y1, y1, y0})
	for y := y0 + mm(10); y < y1; y += mm(10) {
		thin := newInker(img, black, mm(0.15))
		thin.polyline([]float64{mm(22), float64(W) - mm(22)}, []float64{y, y})
	}
	return img
}
