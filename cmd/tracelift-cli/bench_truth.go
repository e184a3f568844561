package main

import (
	"bytes"
	"context"
	"image"
	"image/draw"
	"image/jpeg"
	"path/filepath"
	"strings"
	"time"

	"tracelift/axis"
	"tracelift/calib"
	"tracelift/digitize"
	"tracelift/pipeline"
	"tracelift/samples"
)

// readWithTruth traces a bench case on the calibration the renderer's
// truth gives instead of calib.Detect's, so that the tracer is scored
// apart from calib (bench --truth-calib): the picture the file holds (a
// JPEG decoded, else the degraded printout itself, which PNG and the
// fax TIFF hold without loss) is flattened back onto the clean render's
// grid through the truth's page-to-image map (samples.Unwarp), and the
// scale, gain, speed and pulses are the truth's. The tracing and the
// measuring are then the pipeline's (digitize.Run, Outcome.Remeasure).
// The ink map is calib's of the flattened page (calib.InkOf), made
// without the grid's positions, where Detect's knows them.
// Timings.Calib holds the time to flatten the page and map its ink.
func readWithTruth(clean, po *samples.Printout, name string, data []byte) (*pipeline.Outcome, error) {
	pic := po.Image
	if strings.EqualFold(filepath.Ext(name), ".jpg") {
		m, err := jpeg.Decode(bytes.NewReader(data))
		if err != nil {
			return nil, err
		}
		pic = image.NewNRGBA(m.Bounds())
		draw.Draw(pic, pic.Rect, m, m.Bounds().Min, draw.Src)
	}
	o := &pipeline.Outcome{Page: &calib.Page{Image: pic, Path: name}}
	t := time.Now()
	o.Calib = truthCalibration(pic, clean.Image.Rect.Dx(), clean.Image.Rect.Dy(), po.Truth)
	o.Timings.Calib = time.Since(t)
	t = time.Now()
	dr, err := digitize.Run(context.Background(), o.Calib, digitize.Options{})
	o.Timings.Digitize = time.Since(t)
	if err != nil {
		return o, err
	}
	o.Digitized = dr
	pipeline.Adopt(o, dr)
	pipeline.FillProvenance(dr.Record, o.Page, o.Calib, dr)
	o.Remeasure(axis.Options{})
	return o, nil
}

// truthCalibration is what an ideal calib.Detect would return for pic, a
// picture of a printout whose truth is tr and whose clean render is w × h
// px: the page flattened at the clean render's scale, the picture's own
// scales and rotation, the gain and speed as given (SpeedStated: printed
// text read off the page does not replace them) and the pulses where they
// were drawn, and calib's ink map of the flattened page.
func truthCalibration(pic *image.NRGBA, w, h int, tr samples.Truth) *calib.Result {
	s := tr.CleanPxPerMM
	flat := samples.Unwarp(pic, tr, w, h)
	cal := &calib.Result{
		Rectified: flat, Ink: calib.InkOf(flat, s), PxPerMM: s,
		PxPerMMX: tr.PxPerMMX, PxPerMMY: tr.PxPerMMY, RotationDeg: tr.RotationDeg,
		GainMMPerMV: tr.GainMMPerMV, SpeedMMPerS: tr.SpeedMMPerS, SpeedFrom: calib.SpeedStated,
		Source: "truth", Confidence: 1, RectToImage: tr.PageToImage,
	}
	// Truth.Pulses are x0 (rise), y0 (top), x1 (fall), y1 (baseline) in
	// clean-render px, which are the flattened page's.
	for _, b := range tr.Pulses {
		cal.Pulses = append(cal.Pulses, calib.Pulse{Box: b, HeightMM: (b[3] - b[1]) / s, WidthMM: (b[2] - b[0]) / s})
	}
	return cal
}
