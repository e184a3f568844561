package calib

import (
	"context"
	"testing"
	"tracelift/samples"
	"tracelift/samples/dipole"
)

func TestDbgX(t *testing.T) {
	dbgGrid = t.Logf
	defer func() { dbgGrid = nil }()
	s := synth{w: 2100, h: 1500, ppmX: 7.3, ppmY: 7.3, rotDeg: 2, grid: red, minorMM: 0.1, majorMM: 0.25, traceMM: 0.3}
	res, err := Detect(context.Background(), &Page{Image: s.draw()}, Options{})
	t.Log(err, res.PxPerMMX, res.PxPerMMY)
	s = synth{w: 1600, h: 1150, ppmX: 5.5, ppmY: 5.5, grid: blue, minorMM: 0.12, majorMM: 0.3, traceMM: 0.35}
	res, err = Detect(context.Background(), &Page{Image: s.draw()}, Options{})
	t.Log(err, res.PxPerMMX, res.PxPerMMY)
	rec := dipole.Generate(dipole.Params{Seed: 9})
	st := samples.DefaultStyle()
	st.Grid = samples.GridNone
	st.DPI = 200
	p, _ := samples.Render(rec, st)
	res, err = Detect(context.Background(), &Page{Image: p.Image}, Options{})
	t.Log(err)
}
