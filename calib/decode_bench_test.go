package calib

import (
	"bytes"
	"fmt"
	"image"
	"image/jpeg"
	"image/png"
	"math/rand"
	"testing"

	"gocv.io/x/gocv"

	"tracelift/samples"
	"tracelift/samples/dipole"
)

// renderedPage is a clean A4 render at dpi (the samples renderer).
func renderedPage(b *testing.B, dpi float64) image.Image {
	st := samples.DefaultStyle()
	st.DPI = dpi
	p, err := samples.Render(dipole.Generate(dipole.Params{Seed: 3}), st)
	if err != nil {
		b.Fatal(err)
	}
	return p.Image
}

// jpegOpenCV decodes a colour JPEG as OpenCV would for calib: IMDecode
// (orientation left to calib), then BGR to RGBA straight into a Go
// *image.NRGBA.
func jpegOpenCV(data []byte, w, h int) (*image.NRGBA, error) {
	m, err := gocv.IMDecode(data, gocv.IMReadColor|gocv.IMReadIgnoreOrientation)
	defer m.Close()
	if err != nil || m.Empty() || m.Cols() != w || m.Rows() != h {
		return nil, fmt.Errorf("opencv could not decode the JPEG: %v", err)
	}
	out := image.NewNRGBA(image.Rect(0, 0, w, h))
	dst, err := gocv.NewMatFromBytes(h, w, gocv.MatTypeCV8UC4, out.Pix)
	defer dst.Close()
	if err != nil {
		return nil, err
	}
	gocv.CvtColor(m, &dst, gocv.ColorBGRToRGBA)
	return out, nil
}

// BenchmarkDecodeJPEG decodes a 6-MP colour JPEG (an A4 page rendered at
// 256 dpi, 2993×2117 px, quality 90) with the standard library and with
// OpenCV (jpegOpenCV). The figures are in decodeJPEG's comment.
func BenchmarkDecodeJPEG(b *testing.B) {
	img := renderedPage(b, 256)
	var buf bytes.Buffer
	if err := jpeg.Encode(&buf, img, &jpeg.Options{Quality: 90}); err != nil {
		b.Fatal(err)
	}
	data := buf.Bytes()
	cfg, err := jpeg.DecodeConfig(bytes.NewReader(data))
	if err != nil {
		b.Fatal(err)
	}
	b.Logf("%d×%d px, %d bytes", cfg.Width, cfg.Height, len(data))
	b.Run("stdlib", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			if _, err := jpeg.Decode(bytes.NewReader(data)); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("opencv", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			if _, err := jpegOpenCV(data, cfg.Width, cfg.Height); err != nil {
				b.Fatal(err)
			}
		}
	})
}

// BenchmarkDecodePNG decodes a 300-dpi A4 scan (3508×2480 px, a render
// through the photocopy condition, written by the standard library) with
// the standard library and with OpenCV (IMDecode, then BGRA to RGBA into a
// Go *image.NRGBA, as the JPEG path does). The figures are in decodePNG's
// comment.
func BenchmarkDecodePNG(b *testing.B) {
	st := samples.DefaultStyle()
	p, err := samples.Render(dipole.Generate(dipole.Params{Seed: 3}), st)
	if err != nil {
		b.Fatal(err)
	}
	if p, err = samples.Degrade(p, samples.Condition("photocopy", rand.New(rand.NewSource(5)))); err != nil {
		b.Fatal(err)
	}
	img := p.Image
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		b.Fatal(err)
	}
	data := buf.Bytes()
	b.Logf("%T, %d bytes", img, len(data))
	b.Run("stdlib", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			if _, err := png.Decode(bytes.NewReader(data)); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("opencv", func(b *testing.B) {
		decode := func() bool {
			m, err := gocv.IMDecode(data, gocv.IMReadUnchanged)
			defer m.Close()
			if err != nil || m.Empty() {
				return false
			}
			if m.Channels() == 1 {
				out := image.NewGray(image.Rect(0, 0, m.Cols(), m.Rows()))
				px, err := m.DataPtrUint8()
				copy(out.Pix, px)
				return err == nil
			}
			code := gocv.ColorBGRToRGBA
			if m.Channels() == 4 {
				code = gocv.ColorBGRAToRGBA
			}
			out := image.NewNRGBA(image.Rect(0, 0, m.Cols(), m.Rows()))
			dst, err := gocv.NewMatFromBytes(m.Rows(), m.Cols(), gocv.MatTypeCV8UC4, out.Pix)
			defer dst.Close()
			if err != nil {
				return false
			}
			gocv.CvtColor(m, &dst, code)
			return true
		}
		for i := 0; i < b.N; i++ {
			if !decode() {
				b.Fatal("opencv could not decode the PNG")
			}
		}
	})
}
