package gui

import (
	"image"
	"testing"

	"github.com/disintegration/imaging"
)

// BenchmarkViewBlit: the page view's redraw of a 300-dpi page (3508×2480)
// into a 1600×1000 view at half size from (400, 300), by blitScaled and
// by imaging (Crop of the part shown, then Resize with the nearest
// neighbour: the same view, each library choosing its own nearest source
// pixel). The figures are in blitScaled's comment.
func BenchmarkViewBlit(b *testing.B) {
	src := image.NewNRGBA(image.Rect(0, 0, 3508, 2480))
	for i := range src.Pix {
		src.Pix[i] = uint8(i * 7)
	}
	dst := image.NewNRGBA(image.Rect(0, 0, 1600, 1000))
	const k, offX, offY = 0.5, 400.0, 300.0
	b.Run("blitScaled", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			blitScaled(dst, src, offX, offY, k)
		}
	})
	b.Run("imaging", func(b *testing.B) {
		for i := 0; i < b.N; i++ {
			part := imaging.Crop(src, image.Rect(int(offX), int(offY), int(offX+1600/k), int(offY+1000/k)))
			_ = imaging.Resize(part, 1600, 1000, imaging.NearestNeighbor)
		}
	})
}
