package report

import (
	"bytes"
	"fmt"
	"image"
	"image/jpeg"
	"math"

	"github.com/go-pdf/fpdf"
	xdraw "golang.org/x/image/draw"
)

// maxEmbedPx bounds the longer side of the embedded source image: about
// 300 dpi across the 255 mm wide frame, enough to audit a trace by eye
// while keeping the file small.
const maxEmbedPx = 3000

// embedImage scales img down to at most maxEmbedPx on its longer side and
// encodes it as JPEG. It returns the bytes and the scale from source px to
// embedded px.
func embedImage(img image.Image) ([]byte, error) {
	b := img.Bounds()
	w, h := b.Dx(), b.Dy()
	k := math.Min(1, float64(maxEmbedPx)/float64(max(w, h)))
	dw, dh := max(1, int(math.Round(float64(w)*k))), max(1, int(math.Round(float64(h)*k)))
	dst := image.NewRGBA(image.Rect(0, 0, dw, dh))
	if k == 1 {
		xdraw.Draw(dst, dst.Bounds(), img, b.Min, xdraw.Src)
	} else {
		xdraw.ApproxBiLinear.Scale(dst, dst.Bounds(), img, b, xdraw.Src, nil)
	}
	var buf bytes.Buffer
	if err := jpeg.Encode(&buf, dst, &jpeg.Options{Quality: 88}); err != nil {
		return nil, fmt.Errorf("report: encoding the source image: %w", err)
	}
	return buf.Bytes(), nil
}

// fitRect places a w×h picture inside the box (x, y, bw, bh), centred and
// keeping its aspect ratio; it returns the placement and the mm per px.
func fitRect(w, h int, x, y, bw, bh float64) (px, py, pw, ph, mmPerPx float64) {
	mmPerPx = math.Min(bw/float64(w), bh/float64(h))
	pw, ph = float64(w)*mmPerPx, float64(h)*mmPerPx
	return x + (bw-pw)/2, y + (bh-ph)/2, pw, ph, mmPerPx
}

// sourcePage draws page 2: the source image with the traced leads over it.
func (c *canvas) sourcePage(s *Summary) error {
	l := c.l
	x0, w := l.gridX, gridWMM
	c.color(colAccent)
	c.font("B", 13)
	c.text(x0, l.margin+6, "Source image with the traced leads", 'L')
	c.font("", 7)
	c.color(colMuted)
	c.text(x0+w, l.margin+2, "for audit: each traced lead is drawn over the image it came from", 'R')
	if len(s.Facts) > 0 {
		c.text(x0+w, l.margin+5.1, c.fit(s.Facts[0], 150), 'R')
	}
	data, err := embedImage(s.Source)
	if err != nil {
		return err
	}
	b := s.Source.Bounds()
	top := l.margin + 10
	px, py, pw, ph, k := fitRect(b.Dx(), b.Dy(), x0, top, w, l.cautionY-3-top)
	c.pdf.RegisterImageOptionsReader("source", fpdf.ImageOptions{ImageType: "JPG"}, bytes.NewReader(data))
	c.pdf.ImageOptions("source", px, py, pw, ph, false, fpdf.ImageOptions{ImageType: "JPG"}, 0, "")
	c.draw(colMajor)
	c.pdf.SetLineWidth(0.2)
	c.pdf.Rect(px, py, pw, ph, "D")
	// The traces, clipped to the picture.
	c.pdf.ClipRect(px, py, pw, ph, false)
	c.pdf.SetAlpha(0.85, "Normal")
	c.draw(colOverlay)
	c.pdf.SetLineWidth(0.3)
	for _, pl := range s.Overlay {
		var cur [][2]float64
		var label *[2]float64
		for i := range pl.X {
			xv, yv := pl.X[i], pl.Y[i]
			if math.IsNaN(xv) || math.IsNaN(yv) {
				c.polyline(cur)
				cur = cur[:0]
				continue
			}
			p := [2]float64{px + (xv-float64(b.Min.X))*k, py + (yv-float64(b.Min.Y))*k}
			cur = append(cur, p)
			if label == nil {
				label = &p
			}
		}
		c.polyline(cur)
		// Text is drawn after the path: a text object may not sit inside
		// a path under construction.
		if label != nil && pl.Lead != "" {
			c.font("B", 7)
			c.color(colOverlay)
			c.text(label[0]+0.8, label[1]-2, pl.Lead, 'L')
		}
	}
	c.pdf.SetAlpha(1, "Normal")
	c.pdf.ClipEnd()
	return nil
}
