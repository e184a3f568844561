package digitize

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// timeBase fits x0(y) = a + b·(y − ym) and the span L to the rows' marks
// and returns each row's first-sample position and L. Rows whose marks
// are missing or disagree with the fit by more than tol px are left out;
// the shear b is only fitted with three or more rows holding an agreeing
// mark and is limited to what a residual rotation of 1.5° gives.
func timeBase(rows []rowInfo, marks []rowMarks, tol float64) (x0s []float64, L, shear float64, fitted, ok bool) {
	n := len(rows)
	ym := 0.0
	for _, r := range rows {
		ym += r.base
	}
	ym /= float64(n)
	useS := make([]bool, n)
	useE := make([]bool, n)
	for i, m := range marks {
		useS[i], useE[i] = m.okStart, m.okEnd
	}
	// A robust start: the shear as the median slope over pairs of rows
	// (Theil–Sen) of either kind of mark, so that one wild mark does not
	// pull the first least-squares fit and get every row rejected.
	var slopes []float64
	for i := range marks {
		for j := i + 1; j < n; j++ {
			dy := rows[j].base - rows[i].base
			if math.Abs(dy) < 1 {
				continue
			}
			if marks[i].okStart && marks[j].okStart {
				slopes = append(slopes, (marks[j].start-marks[i].start)/dy)
			}
			if marks[i].okEnd && marks[j].okEnd {
				slopes = append(slopes, (marks[j].end-marks[i].end)/dy)
			}
		}
	}
	var a, b float64
	if len(slopes) > 0 {
		b = median(slopes)
	}
	for iter := 0; iter < 5; iter++ {
		// Robust first guesses from medians, then least squares.
		var ss, es []float64
		for i, m := range marks {
			if useS[i] {
				ss = append(ss, m.start-b*(rows[i].base-ym))
			}
			if useE[i] {
				es = append(es, m.end-b*(rows[i].base-ym))
			}
		}
		if len(ss) == 0 || len(es) == 0 {
			return nil, 0, 0, false, false
		}
		if iter == 0 {
			// Reject from the robust fit first.
			a = median(ss)
			L = median(es) - a
			for i, m := range marks {
				d := rows[i].base - ym
				useS[i] = m.okStart && math.Abs(m.start-(a+b*d)) <= tol
				useE[i] = m.okEnd && math.Abs(m.end-(a+L+b*d)) <= tol
			}
			continue
		}
		// Least squares over the unknowns a, L, b on the kept marks:
		// start_i = a + b·d_i, end_i = a + L + b·d_i (gonum's QR).
		var rowsA [][3]float64
		var obsV []float64
		nr := 0 // rows with a kept mark
		for i, m := range marks {
			d := rows[i].base - ym
			if useS[i] {
				rowsA = append(rowsA, [3]float64{1, 0, d})
				obsV = append(obsV, m.start)
			}
			if useE[i] {
				rowsA = append(rowsA, [3]float64{1, 1, d})
				obsV = append(obsV, m.end)
			}
			if useS[i] || useE[i] {
				nr++
			}
		}
		fitB := nr >= 3
		fitted = fitB
		if !fitB {
			// Hold b at zero: a weak prior row, b·1000 = 0.
			rowsA = append(rowsA, [3]float64{0, 0, 1000})
			obsV = append(obsV, 0)
		}
		if sol, good := lstsq3(rowsA, obsV); good {
			a, L, b = sol[0], sol[1], sol[2]
			if lim := math.Tan(1.5 * math.Pi / 180); math.Abs(b) > lim {
				b = math.Copysign(lim, b)
			}
		}
		changed := false
		nS, nE := 0, 0
		newS, newE := make([]bool, n), make([]bool, n)
		for i, m := range marks {
			d := rows[i].base - ym
			newS[i] = m.okStart && math.Abs(m.start-(a+b*d)) <= tol
			newE[i] = m.okEnd && math.Abs(m.end-(a+L+b*d)) <= tol
			changed = changed || newS[i] != useS[i] || newE[i] != useE[i]
			if newS[i] {
				nS++
			}
			if newE[i] {
				nE++
			}
		}
		if !changed || nS == 0 || nE == 0 {
			break
		}
		useS, useE = newS, newE
	}
	x0s = make([]float64, n)
	for i := range rows {
		x0s[i] = a + b*(rows[i].base-ym)
	}
	return x0s, L, b, fitted, L > 0
}

// lstsq3 solves the least-squares problem rows·x ≈ obs for three
// unknowns (gonum's QR); ok is false with fewer than three rows or when
// they do not fix the three.
func lstsq3(rows [][3]float64, obs []float64) ([3]float64, bool) {
	if len(rows) < 3 {
		return [3]float64{}, false
	}
	A := mat.NewDense(len(rows), 3, nil)
	for i, r := range rows {
		A.SetRow(i, r[:])
	}
	var x mat.VecDense
	if err := x.SolveVec(A, mat.NewVecDense(len(obs), obs)); err != nil {
		return [3]float64{}, false
	}
	return [3]float64{x.AtVec(0), x.AtVec(1), x.AtVec(2)}, true
}

// How time 0 was found on a page.
const (
	// T0First: the first ink after the gap that follows the pulse, or
	// after the margin.
	T0First = "first ink of the traces"
	// T0Span: the pulse is joined to the traces, so their start is not
	// shown; time 0 stands one standard duration before the traces' end.
	T0Span = "traces' end and a 10 s page"
	// T0Fall: the pulse is joined to the traces and the span does not
	// fit a standard page; time 0 is taken at the pulse's falling stroke
	// and may be late or early by the pulse's lead-out.
	T0Fall = "falling stroke of the joined pulse"
)

// printedS is the duration a full page of a standard resting ECG shows
// (common practice: 10 s recorded, every layout spreading those 10 s over
// its columns).
const printedS = 10.0

// hiddenStarts handles rows whose calibration pulse is printed joined to
// the trace: the ink runs from the pulse's falling stroke straight on
// into the trace, so no walk can tell where the first sample stands
// (what ink dips along the lead-out's level is as likely a first wave
// leaving it). When most rows with a pulse are joined, their starts are
// replaced: by the rows' ends less the span of a standard 10 s page where
// that lands between the falling stroke and 5 mm after it (a lead-out is
// a few millimetres at most), else by the falling stroke itself. Rows
// with no pulse on the left are tried for one joined at their right end,
// whose rising stroke hides their ends the same way. It returns how time
// 0 is found.
func hiddenStarts(marks []rowMarks, hw, pxPerMM, pxPerS float64) string {
	switch joined, span := hideJoined(marks, false, hw, pxPerMM, pxPerS); {
	case !joined:
		hideJoined(marks, true, hw, pxPerMM, pxPerS)
		return T0First
	case span:
		return T0Span
	default:
		return T0Fall
	}
}

// pulseSide is one row's marks seen from the end where its pulse stands:
// the trace end the pulse hides and the one it leaves in view.
type pulseSide struct {
	edge        float64 // where the pulse's stroke facing the trace stands
	has, joined bool
	seen        float64 // the end in view
	seenOK      bool
	hidden      *float64 // the end the pulse hides
	hiddenOK    *bool
	dir         float64 // −1 for a pulse on the left, +1 on the right: from the end in view towards the pulse
}

func sideOf(m *rowMarks, right bool, hw float64) pulseSide {
	if right {
		return pulseSide{edge: float64(m.rise) - 0.5 + hw, has: m.rise >= 0, joined: m.joinedEnd,
			seen: m.start, seenOK: m.okStart, hidden: &m.end, hiddenOK: &m.okEnd, dir: +1}
	}
	return pulseSide{edge: float64(m.fall) + 0.5 - hw, has: m.fall >= 0, joined: m.joined,
		seen: m.end, seenOK: m.okEnd, hidden: &m.start, hiddenOK: &m.okStart, dir: -1}
}

// hideJoined replaces the hidden ends of the rows whose pulse, at the
// left end or the right, is joined to the trace, when most rows with a
// pulse there are: by the end in view and a 10 s page where that lands
// within 5 mm of the pulse's stroke on the trace's side (span true), else
// by the stroke itself where no walk found the end. joined is false when
// they are not.
func hideJoined(marks []rowMarks, right bool, hw, pxPerMM, pxPerS float64) (joined, span bool) {
	nPulse, nJoined := 0, 0
	for i := range marks {
		if v := sideOf(&marks[i], right, hw); v.has {
			nPulse++
			if v.joined {
				nJoined++
			}
		}
	}
	if nPulse == 0 || 2*nJoined < nPulse {
		return false, false
	}
	L := printedS*pxPerS - 1 // first sample to last, at 500 Hz about one px short of the full span
	var gaps []float64       // from the derived end to the pulse's stroke, away from the trace
	for i := range marks {
		if v := sideOf(&marks[i], right, hw); v.has && v.seenOK {
			gaps = append(gaps, v.dir*(v.edge-(v.seen+v.dir*L)))
		}
	}
	if len(gaps) > 0 {
		d := median(gaps)
		span = d >= -0.75*pxPerMM && d <= 5*pxPerMM
	}
	for i := range marks {
		v := sideOf(&marks[i], right, hw)
		if !v.has {
			continue
		}
		switch {
		case span && v.seenOK:
			*v.hidden, *v.hiddenOK = v.seen+v.dir*L, true
		case span:
			*v.hiddenOK = false
		case !*v.hiddenOK:
			// Only where no walk found the end: one found after the
			// lead-out beats the pulse's stroke.
			*v.hidden, *v.hiddenOK = v.edge, true
		}
	}
	return true, span
}
