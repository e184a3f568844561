package digitize

import (
	"context"
	"testing"
	"tracelift/calib"

	"tracelift/samples"
)

func contextBG() context.Context { return context.Background() }

// BenchmarkRun300dpi digitizes a clean 300-dpi A4 3x4+1 page (the issue's
// goal: ≤ 1 s per page on one core, ≤ 400 MB peak). Run with
// go test -run XXX -bench Run300dpi -benchmem -cpu 1 ./digitize
func BenchmarkRun300dpi(b *testing.B) {
	p := render(b, dipoleRecord(1), samples.DefaultStyle())
	cal := truthCal(p)
	cal.Ink = nil // include the ink map in the timing
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := Run(context.Background(), cal, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkDeskew300dpi turns a 300-dpi A4 page and its ink map by a
// residual 0.5° (done only when the rows show such a turn). Run with
// go test -run XXX -bench Deskew300dpi -benchmem -cpu 1 ./digitize
func BenchmarkDeskew300dpi(b *testing.B) {
	p := render(b, dipoleRecord(1), samples.DefaultStyle())
	cal := truthCal(p)
	rect, ink := cal.Rectified, calib.InkOf(cal.Rectified, cal.PxPerMM)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		c := cal.Clone()
		c.Rectified, c.Ink = rect, ink
		c.Apply(calib.Adjustment{Kind: calib.AdjustStraighten, Shear: 0.0087, Center: [2]float64{1700, 1200}})
	}
}
