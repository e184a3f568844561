package calib

import (
	"context"
	"math"
	"math/rand"
	"testing"
	"time"

	"tracelift/samples"
	"tracelift/samples/dipole"
)

// rendered is one test case drawn by the samples renderer, with its truth.
type rendered struct {
	cond  string
	style samples.Style
	p     *samples.Printout
}

// renderCase draws case i of a sweep: a random style and the named
// condition, all from one random source so the case is reproducible.
func renderCase(t testing.TB, cond string, i int, base int64) rendered {
	t.Helper()
	rng := rand.New(rand.NewSource(base + int64(i)*7919))
	st := samples.RandomStyle(rng)
	if st.Grid == samples.GridNone {
		st.Grid = samples.GridLines // the scale sweep needs a grid; GridNone has its own test
	}
	rec := dipole.Generate(dipole.Params{Seed: rng.Int63(), HeartRateBPM: 50 + 50*rng.Float64()})
	p, err := samples.Render(rec, st)
	if err != nil {
		t.Fatalf("render: %v", err)
	}
	d := samples.Condition(cond, rng)
	q, err := samples.Degrade(p, d)
	if err != nil {
		t.Fatalf("degrade: %v", err)
	}
	return rendered{cond: cond, style: st, p: q}
}

type caseResult struct {
	errX, errY, errRot float64 // relative scale errors, rotation error in degrees
	gainOK, speedOK    bool
	ms                 float64
	source             string
	err                error
}

func runCase(rc rendered) caseResult {
	pg := &Page{Image: rc.p.Image, Path: "rendered", Format: "png", PageCount: 1}
	t0 := time.Now()
	res, err := Detect(context.Background(), pg, Options{})
	ms := float64(time.Since(t0).Microseconds()) / 1000
	if err != nil {
		return caseResult{err: err, ms: ms}
	}
	tr := rc.p.Truth
	return caseResult{
		errX:    math.Abs(res.PxPerMMX/tr.PxPerMMX - 1),
		errY:    math.Abs(res.PxPerMMY/tr.PxPerMMY - 1),
		errRot:  math.Abs(res.RotationDeg - tr.RotationDeg),
		gainOK:  res.GainMMPerMV == tr.GainMMPerMV,
		speedOK: res.SpeedMMPerS == tr.SpeedMMPerS,
		ms:      ms,
		source:  res.Source,
	}
}
