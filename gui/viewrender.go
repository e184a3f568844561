package gui

import (
	"image"
	"image/color"
	"image/draw"
	"math"
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/theme"

	"tracelift/record"
)

type viewRenderer struct {
	v      *printView
	raster *canvas.Raster
	labels []*canvas.Text
	hint   *canvas.Text
	scale  *canvas.Text // names the scale bar
	buf    *image.NRGBA
}

func (r *viewRenderer) Destroy() {}

func (r *viewRenderer) Layout(sz fyne.Size) {
	r.raster.Resize(sz)
	if r.v.fit {
		r.v.fitNow()
	}
	r.placeLabels()
	hs := r.hint.MinSize()
	r.hint.Move(fyne.NewPos((sz.Width-hs.Width)/2, (sz.Height-hs.Height)/2))
}

func (r *viewRenderer) MinSize() fyne.Size { return fyne.NewSize(200, 150) }

func (r *viewRenderer) Objects() []fyne.CanvasObject {
	objs := []fyne.CanvasObject{r.raster}
	for _, l := range r.labels {
		objs = append(objs, l)
	}
	if r.v.src == nil {
		objs = append(objs, r.hint)
	} else if r.v.ctl.m.Loaded() && !r.v.hideOverlays {
		objs = append(objs, r.scale)
	}
	return objs
}

func (r *viewRenderer) Refresh() {
	if r.v.fit {
		r.v.fitNow()
	}
	r.placeLabels()
	r.hint.Color = theme.Color(theme.ColorNameForeground)
	r.raster.Refresh()
	for _, l := range r.labels {
		l.Refresh()
	}
}

func (r *viewRenderer) placeLabels() {
	v := r.v
	views := v.ctl.m.Panels()
	if !v.ctl.m.Loaded() {
		views = nil
	}
	if v.hideOverlays {
		views = nil
	}
	for len(r.labels) < len(views) {
		t := canvas.NewText("", labelColor)
		t.TextStyle = fyne.TextStyle{Bold: true}
		r.labels = append(r.labels, t)
	}
	r.labels = r.labels[:len(views)]
	if v.src != nil {
		// beside the 10 mm bar drawn in the raster's bottom-left corner
		y := math.Min((float64(v.src.Rect.Dy())-v.offY)*v.zoom, float64(v.Size().Height)) - 12
		x := (0-v.offX)*v.zoom + 12
		if a := v.ctl.m.Analysis(); a != nil {
			x += 10*a.PxPerMM*v.zoom + 6
		}
		r.scale.Move(fyne.NewPos(float32(x), float32(y)-r.scale.MinSize().Height/2))
	}
	for i, pv := range views {
		t := r.labels[i]
		name := pv.Lead
		if pv.Sign < 0 {
			name = "−" + name
		}
		if pv.Drawn {
			name += " (drawn by hand)"
		} else if printedLead(pv.Printed) != pv.Lead {
			name += " (read as " + pv.Printed + ")"
		}
		t.Text = name
		t.TextSize = theme.TextSize()
		t.Color = labelColor
		if i == v.selected {
			t.Color = selColor
		}
		x := float32((pv.Box[0] - v.offX) * v.zoom)
		y := float32((pv.Box[1] - v.offY) * v.zoom)
		t.Move(fyne.NewPos(x+4, y+2))
	}
}

var (
	labelColor = color.NRGBA{0x10, 0x4e, 0xb0, 0xff}
	selColor   = color.NRGBA{0xd0, 0x20, 0x90, 0xff}
	boxColor   = color.NRGBA{0x30, 0x70, 0xd0, 0xb0}
	baseColor  = color.NRGBA{0x60, 0x60, 0x60, 0xc0}
	strokeCol  = color.NRGBA{0xd0, 0x20, 0x90, 0xff}
	selBand    = color.NRGBA{0xff, 0xc0, 0x20, 0x50}
	scaleCol   = color.NRGBA{0x00, 0x80, 0x80, 0xff}
	halo       = color.NRGBA{0x10, 0x10, 0x18, 0xb0}
	plate      = color.NRGBA{0xff, 0xff, 0xff, 0xd8}
	erasedBand = color.NRGBA{0x90, 0x90, 0x90, 0x48}
	erasedCol  = color.NRGBA{0xb0, 0x20, 0x20, 0xe0}
	handleCol  = color.NRGBA{0xff, 0xff, 0xff, 0xff}
)

// confidenceColor: sure green, doubtful amber, poor red; unknown grey.
func confidenceColor(q float64) color.NRGBA {
	switch {
	case math.IsNaN(q):
		return color.NRGBA{0x70, 0x70, 0x70, 0xff}
	case q >= 0.75:
		return color.NRGBA{0x10, 0x9a, 0x3a, 0xff}
	case q >= 0.5:
		return color.NRGBA{0xe0, 0x90, 0x00, 0xff}
	default:
		return color.NRGBA{0xe0, 0x20, 0x20, 0xff}
	}
}

func (r *viewRenderer) draw(w, h int) image.Image {
	v := r.v
	if r.buf == nil || r.buf.Rect.Dx() != w || r.buf.Rect.Dy() != h {
		r.buf = image.NewNRGBA(image.Rect(0, 0, w, h))
	}
	dst := r.buf
	bg := theme.Color(theme.ColorNameBackground)
	draw.Draw(dst, dst.Rect, image.NewUniform(bg), image.Point{}, draw.Src)
	sz := v.Size()
	if v.src == nil || sz.Width <= 0 || w == 0 {
		return dst
	}
	// device px per screen unit (HiDPI)
	dev := float64(w) / float64(sz.Width)
	k := v.zoom * dev // device px per image px
	blitScaled(dst, v.src, v.offX, v.offY, k)

	m := v.ctl.m
	if !m.Loaded() || v.hideOverlays {
		return dst
	}
	toDev := func(p [2]float64) (float64, float64) { return (p[0] - v.offX) * k, (p[1] - v.offY) * k }
	lw := math.Max(1, dev*1.5)
	for i, pv := range m.Panels() {
		dx, dy := 0.0, 0.0
		b := pv.Box
		if v.dragging && i == v.selPanel && v.tool == ToolBox {
			b = v.boxAfterDrag(i)
			if v.grip == [4]bool{} {
				dx, dy = v.moveDX, v.moveDY
			}
		}
		x0, y0 := toDev([2]float64{b[0], b[1]})
		x1, y1 := toDev([2]float64{b[2], b[3]})
		c := boxColor
		if i == v.selected {
			c = selColor
		}
		rect(dst, x0, y0, x1, y1, math.Max(1, dev)+2*dev, halo)
		if pv.Drawn {
			dashed(dst, x0, y0, x1, y0, math.Max(1, dev)*2, c)
			dashed(dst, x0, y1, x1, y1, math.Max(1, dev)*2, c)
			rect(dst, x0, y0, x1, y1, math.Max(1, dev), c)
		} else {
			rect(dst, x0, y0, x1, y1, math.Max(1, dev), c)
		}
		if v.tool == ToolBox {
			// Handles at the corners and the middles of the edges: a drag
			// that starts on one resizes the box.
			hs := 3 * dev
			for _, hx := range []float64{x0, (x0 + x1) / 2, x1} {
				for _, hy := range []float64{y0, (y0 + y1) / 2, y1} {
					if hx == (x0+x1)/2 && hy == (y0+y1)/2 {
						continue
					}
					fill(dst, hx-hs-dev, hy-hs-dev, hx+hs+dev, hy+hs+dev, halo)
					fill(dst, hx-hs, hy-hs, hx+hs, hy+hs, handleCol)
				}
			}
		}
		bdy := dy
		if v.dragging && i == v.selPanel && v.tool == ToolBaseline {
			bdy = v.moveDY
		}
		_, by := toDev([2]float64{0, pv.BaselineY + bdy})
		dashed(dst, x0, by, x1, by, math.Max(1, dev), baseColor)

		col := confidenceColor(pv.Confidence)
		sdy := 0.0
		if v.tool == ToolShift && v.moving && i == v.selPanel {
			sdy = v.moveDY
		}
		lo, hi := math.Min(v.selX0, v.selX1), math.Max(v.selX0, v.selX1)
		// Each trace is drawn over a dark halo so that it stays visible on
		// a green, red or dark grid and on the ink it follows.
		for pass, c := range []color.NRGBA{halo, col} {
			w := lw
			if pass == 0 {
				w = lw + 2*dev
			}
			for _, run := range m.Polyline(i) {
				for j := 1; j < len(run); j++ {
					a, bb := run[j-1], run[j]
					oy := 0.0
					if sdy != 0 && a[0] >= lo && a[0] <= hi {
						oy = sdy
					}
					ax, ay := toDev([2]float64{a[0] + dx, a[1] + dy + oy})
					bx, by := toDev([2]float64{bb[0] + dx, bb[1] + dy + oy})
					line(dst, ax, ay, bx, by, w, c)
				}
			}
		}
		// Erased stretches: a hatched band, so a gap made by hand is not
		// taken for ink the tracer missed.
		for _, e := range m.Erased(i) {
			ex0, _ := toDev([2]float64{e[0] + dx, 0})
			ex1, _ := toDev([2]float64{e[1] + dx, 0})
			fill(dst, ex0, y0, ex1, y1, erasedBand)
			for x := ex0; x < ex1; x += 8 * dev {
				line(dst, x, by-6*dev, math.Min(x+8*dev, ex1), by+6*dev, math.Max(1, dev), erasedCol)
			}
		}
	}
	// selection band
	if (v.tool == ToolShift || v.tool == ToolErase) && v.selPanel >= 0 && v.selX1 != v.selX0 {
		b := m.Panels()[v.selPanel].Box
		x0, y0 := toDev([2]float64{math.Min(v.selX0, v.selX1), b[1]})
		x1, y1 := toDev([2]float64{math.Max(v.selX0, v.selX1), b[3]})
		fill(dst, x0, y0, x1, y1, selBand)
	}
	// the box of a New panel drag under way
	if v.tool == ToolPanel && v.dragging {
		b := v.drawnBox()
		x0, y0 := toDev([2]float64{b[0], b[1]})
		x1, y1 := toDev([2]float64{b[2], b[3]})
		fill(dst, x0, y0, x1, y1, selBand)
		rect(dst, x0, y0, x1, y1, math.Max(1, dev)+2*dev, halo)
		rect(dst, x0, y0, x1, y1, math.Max(1, dev), strokeCol)
	}
	for j := 1; j < len(v.stroke); j++ {
		ax, ay := toDev(v.stroke[j-1])
		bx, by := toDev(v.stroke[j])
		line(dst, ax, ay, bx, by, lw*1.3, strokeCol)
	}
	for _, p := range v.scaleClick {
		x, y := toDev(p)
		line(dst, x-6*dev, y, x+6*dev, y, lw, scaleCol)
		line(dst, x, y-6*dev, x, y+6*dev, lw, scaleCol)
	}
	// The grid scale found: a 10 mm bar in the corner of the page, on a
	// light plate so that it reads on a dark photo too.
	a := m.Analysis()
	if a.PxPerMM > 0 {
		x0, y0 := toDev([2]float64{0, float64(v.src.Rect.Dy())})
		x0 += 12 * dev
		y0 = math.Min(y0, float64(h)) - 12*dev
		bar := 10 * a.PxPerMM * k
		fill(dst, x0-6*dev, y0-11*dev, x0+bar+6*dev+float64(r.scale.MinSize().Width)*dev+4*dev, y0+9*dev, plate)
		line(dst, x0, y0, x0+bar, y0, 3*dev, scaleCol)
		line(dst, x0, y0-5*dev, x0, y0+5*dev, 2*dev, scaleCol)
		line(dst, x0+bar, y0-5*dev, x0+bar, y0+5*dev, 2*dev, scaleCol)
	}
	return dst
}

// printedLead is the standard name of a printed label, sign dropped.
func printedLead(s string) string {
	s = strings.TrimSpace(s)
	s = strings.TrimPrefix(strings.TrimPrefix(s, "-"), "−")
	return record.CanonicalLead(s)
}
