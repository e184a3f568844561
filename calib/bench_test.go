package calib

import (
	"context"
	"math/rand"
	"testing"

	"tracelift/samples"
	"tracelift/samples/dipole"
)

// BenchmarkDetect300dpi: one A4 page at 300 dpi (3508×2480 px), red grid,
// 3x4+1 layout, rotated by 1.5°; goal ≤ 150 ms on one core. Besides the
// wall time it reports cpu-ms/op, the CPU time of all the process's
// threads (Go and OpenCV's) per call: on a busy machine the wall time
// swells with other work, the CPU time does not; with GOMAXPROCS=1 on an
// idle core the two agree.
func BenchmarkDetect300dpi(b *testing.B) {
	st := samples.DefaultStyle()
	rec := dipole.Generate(dipole.Params{Seed: 3})
	p, err := samples.Render(rec, st)
	if err != nil {
		b.Fatal(err)
	}
	d := samples.Condition("rotated", rand.New(rand.NewSource(5)))
	d.RotationDeg = 1.5
	if p, err = samples.Degrade(p, d); err != nil {
		b.Fatal(err)
	}
	pg := &Page{Image: p.Image}
	b.ReportAllocs()
	b.ResetTimer()
	c0 := processCPU()
	for i := 0; i < b.N; i++ {
		if _, err := Detect(context.Background(), pg, Options{}); err != nil {
			b.Fatal(err)
		}
	}
	if c1 := processCPU(); c0 > 0 && c1 > c0 {
		b.ReportMetric(float64(c1-c0)/1e6/float64(b.N), "cpu-ms/op")
	}
}
