package calib

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// obs says that at work pixel (x, y) the paper coordinate along one axis
// (0 = X, 1 = Y) is val mm.
type obs struct {
	x, y float64
	val  float64
	axis int
	w    float64
	f    float64 // the tile's own line frequency along the axis, mm per work px
}

// ---- homography ----

type mat3 [9]float64

func (m mat3) apply(x, y float64) (float64, float64) {
	d := m[6]*x + m[7]*y + m[8]
	return (m[0]*x + m[1]*y + m[2]) / d, (m[3]*x + m[4]*y + m[5]) / d
}

func (a mat3) mul(b mat3) mat3 {
	var c mat3
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			for k := 0; k < 3; k++ {
				c[3*i+j] += a[3*i+k] * b[3*k+j]
			}
		}
	}
	return c
}

func (m mat3) inv() (mat3, bool) {
	a, b, c := m[0], m[1], m[2]
	d, e, f := m[3], m[4], m[5]
	g, h, i := m[6], m[7], m[8]
	A := e*i - f*h
	B := -(d*i - f*g)
	C := d*h - e*g
	det := a*A + b*B + c*C
	if det == 0 || math.IsNaN(det) {
		return mat3{}, false
	}
	r := mat3{A, -(b*i - c*h), b*f - c*e, B, a*i - c*g, -(a*f - c*d), C, -(a*h - b*g), a*e - b*d}
	for k := range r {
		r[k] /= det
	}
	return r, true
}

var ident = mat3{1, 0, 0, 0, 1, 0, 0, 0, 1}

// fitInverse finds G mapping work px to paper mm, X = (g0 x + g1 y + g2) /
// (g6 x + g7 y + 1) and Y = (g3 x + g4 y + g5) / (same), by weighted linear
// least squares on normalised coordinates; each observation constrains
// one axis, so a tile that shows only one line family still counts.
// affine drops the perspective terms.
func fitInverse(os []obs, affine bool) (mat3, bool) {
	var nx, ny int
	for _, o := range os {
		if o.axis == 0 {
			nx++
		} else {
			ny++
		}
	}
	n := 8
	if affine {
		n = 6
	}
	if nx < 3 || ny < 3 || nx+ny < n+1 {
		return mat3{}, false
	}
	return fitHomography(os, affine)
}

// fitHomography is calib's one homography fit: G from observations of
// one paper coordinate each (val along axis at (x, y), weight w), by
// weighted linear least squares (gonum's QR) on coordinates centred and
// scaled to unit mean spread. Four corners with both coordinates each
// determine it exactly (quadToSquare). affine drops the perspective terms.
func fitHomography(os []obs, affine bool) (mat3, bool) {
	n := 8
	if affine {
		n = 6
	}
	if len(os) < n {
		return mat3{}, false
	}
	var mx, my, sw float64
	var mv [2]float64
	var cv [2]float64
	for _, o := range os {
		mx += o.w * o.x
		my += o.w * o.y
		sw += o.w
		mv[o.axis] += o.w * o.val
		cv[o.axis] += o.w
	}
	if sw <= 0 || cv[0] <= 0 || cv[1] <= 0 {
		return mat3{}, false
	}
	mx, my = mx/sw, my/sw
	mv[0], mv[1] = mv[0]/cv[0], mv[1]/cv[1]
	var sp, sP float64
	for _, o := range os {
		sp += o.w * math.Hypot(o.x-mx, o.y-my)
		sP += o.w * math.Abs(o.val-mv[o.axis])
	}
	sp, sP = sp/sw, sP/sw
	if sp == 0 || sP == 0 {
		return mat3{}, false
	}
	// One row per observation, scaled by √w: the weighted problem as an
	// ordinary one.
	A := mat.NewDense(len(os), n, nil)
	b := mat.NewVecDense(len(os), nil)
	for r, o := range os {
		x, y := (o.x-mx)/sp, (o.y-my)/sp
		v := (o.val - mv[o.axis]) / sP
		sq := math.Sqrt(o.w)
		var row [8]float64
		if o.axis == 0 {
			row = [8]float64{x, y, 1, 0, 0, 0, -v * x, -v * y}
		} else {
			row = [8]float64{0, 0, 0, x, y, 1, -v * x, -v * y}
		}
		for j := 0; j < n; j++ {
			A.Set(r, j, sq*row[j])
		}
		b.SetVec(r, sq*v)
	}
	sol, ok := leastSquares(A, b)
	if !ok {
		return mat3{}, false
	}
	var gn mat3
	for j := 0; j < n; j++ {
		gn[j] = sol.AtVec(j)
	}
	gn[8] = 1
	tin := mat3{1 / sp, 0, -mx / sp, 0, 1 / sp, -my / sp, 0, 0, 1}
	tout := mat3{sP, 0, mv[0], 0, sP, mv[1], 0, 0, 1}
	return tout.mul(gn).mul(tin), true
}

// leastSquares solves min |A·x − b| (gonum's QR; A square is solved
// exactly, by LU); ok is false when A is singular or near it (gonum's
// Condition error, a condition number over mat.ConditionTolerance).
func leastSquares(A *mat.Dense, b *mat.VecDense) (*mat.VecDense, bool) {
	var x mat.VecDense
	if err := x.SolveVec(A, b); err != nil {
		return nil, false
	}
	for i := 0; i < x.Len(); i++ {
		if v := x.AtVec(i); math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, false
		}
	}
	return &x, true
}

// obsResidual is |G(x, y) − val| along the observation's axis, in mm.
func obsResidual(g mat3, o obs) float64 {
	X, Y := g.apply(o.x, o.y)
	if o.axis == 0 {
		return math.Abs(X - o.val)
	}
	return math.Abs(Y - o.val)
}
