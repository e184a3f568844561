package calib

import (
	"math/rand"
	"testing"

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
