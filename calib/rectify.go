package calib

import (
	"image"
	"image/color"
	"runtime"
	"unsafe"

	"gocv.io/x/gocv"
)

// warpPage resamples src into a w×h NRGBA image where rect pixel (x, y)
// takes the colour of source pixel M·(x, y, 1) (bilinear, white outside).
// The source pixels are handed to OpenCV without a copy when they are
// already 8-bit Gray, NRGBA or RGBA; other types are converted once.
func warpPage(src image.Image, m mat3, w, h int) (*image.NRGBA, error) {
	b := src.Bounds()
	var pix []byte
	var typ gocv.MatType
	ch := 4
	stride := 0
	switch s := src.(type) {
	case *image.Gray:
		pix, typ, ch, stride = s.Pix, gocv.MatTypeCV8UC1, 1, s.Stride
	case *image.NRGBA:
		pix, typ, stride = s.Pix, gocv.MatTypeCV8UC4, s.Stride
	case *image.RGBA:
		pix, typ, stride = s.Pix, gocv.MatTypeCV8UC4, s.Stride
	}
	if pix == nil || b.Min != (image.Point{}) || stride != b.Dx()*ch {
		n := toNRGBA(src)
		pix, typ, ch = n.Pix, gocv.MatTypeCV8UC4, 4
	}
	srcMat, err := gocv.NewMatFromBytes(b.Dy(), b.Dx(), typ, pix)
	if err != nil {
		return nil, err
	}
	defer srcMat.Close()
	mm := gocv.NewMatWithSize(3, 3, gocv.MatTypeCV64F)
	defer mm.Close()
	for i := 0; i < 9; i++ {
		mm.SetDoubleAt(i/3, i%3, m[i])
	}
	// Colour pages are resampled straight into the Go image (OpenCV keeps
	// a destination of the right size and type), which saves a copy.
	out := image.NewNRGBA(image.Rect(0, 0, w, h))
	var dst gocv.Mat
	direct := ch == 4 && w > 0 && h > 0
	if direct {
		dst, err = gocv.NewMatFromBytes(h, w, gocv.MatTypeCV8UC4, out.Pix)
		if err != nil {
			return nil, err
		}
	} else {
		dst = gocv.NewMat()
	}
	defer dst.Close()
	white := color.RGBA{255, 255, 255, 255}
	flags := gocv.InterpolationLinear | gocv.WarpInverseMap
	if isAffine(m) {
		aff := gocv.NewMatWithSize(2, 3, gocv.MatTypeCV64F)
		defer aff.Close()
		for i := 0; i < 6; i++ {
			aff.SetDoubleAt(i/3, i%3, m[i]/m[8])
		}
		gocv.WarpAffineWithParams(srcMat, &dst, aff, image.Pt(w, h), flags, gocv.BorderConstant, white)
	} else {
		gocv.WarpPerspectiveWithParams(srcMat, &dst, mm, image.Pt(w, h), flags, gocv.BorderConstant, white)
	}
	runtime.KeepAlive(pix)
	data, err := dst.DataPtrUint8()
	if err != nil {
		return nil, err
	}
	runtime.KeepAlive(out.Pix)
	if ch == 4 {
		// Decoded scans and photos are opaque, and the border is opaque
		// white, so alpha stays 255 through the interpolation.
		if !direct || len(data) == 0 || &data[0] != &out.Pix[0] {
			copy(out.Pix, data) // OpenCV chose its own buffer after all
		}
	} else {
		for i, v := range data[:w*h] {
			j := 4 * i
			out.Pix[j], out.Pix[j+1], out.Pix[j+2], out.Pix[j+3] = v, v, v, 255
		}
	}
	return out, nil
}

func isAffine(m mat3) bool {
	return m[6] == 0 && m[7] == 0 && m[8] != 0
}

// warpPlane resamples a float32 plane (w×h) into a dw×dh plane where pixel
// (x, y) takes the value at M·(x, y, 1) (bilinear, 0 outside).
func warpPlane(src []float32, w, h int, m mat3, dw, dh int) ([]float32, error) {
	b := unsafe.Slice((*byte)(unsafe.Pointer(&src[0])), 4*len(src))
	sm, err := gocv.NewMatFromBytes(h, w, gocv.MatTypeCV32F, b)
	if err != nil {
		return nil, err
	}
	defer sm.Close()
	mm := gocv.NewMatWithSize(3, 3, gocv.MatTypeCV64F)
	defer mm.Close()
	for i := 0; i < 9; i++ {
		mm.SetDoubleAt(i/3, i%3, m[i])
	}
	dst := gocv.NewMat()
	defer dst.Close()
	gocv.WarpPerspectiveWithParams(sm, &dst, mm, image.Pt(dw, dh), gocv.InterpolationLinear|gocv.WarpInverseMap, gocv.BorderConstant, color.RGBA{})
	runtime.KeepAlive(src)
	data, err := dst.DataPtrFloat32()
	if err != nil {
		return nil, err
	}
	out := make([]float32, dw*dh)
	copy(out, data)
	return out, nil
}
