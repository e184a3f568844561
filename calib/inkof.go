package calib

import "image"

// InkOf returns calib's ink map (255 = trace ink, 0 = paper or grid) of
// a page that is already flat and upright at pxPerMM, flattened by other
// means than Detect (a renderer's own page-to-image map, say): the map
// Detect makes where it has no grid positions to go by. pxPerMM ≤ 0 is
// guessed from the page's size. Nil for a nil or empty page.
func InkOf(page *image.NRGBA, pxPerMM float64) *image.Gray {
	if page == nil || page.Rect.Empty() {
		return nil
	}
	ink, _ := inkMap(page, gridLines{s: pxPerMM})
	return ink
}
