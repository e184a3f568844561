package pipeline

import (
	"fmt"
	"math"

	"tracelift/calib"
)

// Thresholds of the page check. They come from the pages this project
// holds: the embedded demo printouts and the outside printouts that
// digitize (../shared/data/outside-printouts 01, 02, 05, 06) found their
// grid at confidence 0.34 to 0.99 with rotation within 6° and equal axis
// scales within 3.1 %; plasma-noise pictures (made in the test) had "grids"
// at confidence 0.02 to 0.42, turned by 25° to 44°, or scaled 70 % apart.
const (
	weakGridConfidence  = 0.5  // below: the grid alone does not show an ECG
	steepRotationDeg    = 12.0 // a weak grid this far turned is taken for texture
	faintGridConfidence = 0.2  // below: a grid whose axes disagree is texture
	axisMismatch        = 0.2  // relative difference of the two axis scales
)

// checkLooksLikeECG refuses a page whose calibration gives no sign of ECG
// paper: a grid found only weakly and either steeply turned or scaled very
// differently along its two axes is the pattern of a texture (noise, a
// photo), not of printed millimetre paper. A scale given by hand, or one
// read from a calibration pulse, the file or the sheet, is not questioned.
// The error wraps calib.ErrNotECG.
func checkLooksLikeECG(cal *calib.Result, opt Options) error {
	if cal == nil || cal.Source != "grid" || opt.Calib.UserDPI > 0 || opt.Calib.UserPxPerMM > 0 {
		return nil
	}
	ratio := 0.0
	if cal.PxPerMMX > 0 && cal.PxPerMMY > 0 {
		ratio = math.Abs(cal.PxPerMMX/cal.PxPerMMY - 1)
	}
	switch {
	case cal.Confidence < weakGridConfidence && math.Abs(cal.RotationDeg) > steepRotationDeg:
		return fmt.Errorf("no ECG found: the only grid-like pattern (confidence %.2f) is turned %.0f°, as a texture is, not ECG paper; check that the file shows an ECG printout, photograph it straight on, or give the scale with --dpi: %w", cal.Confidence, cal.RotationDeg, calib.ErrNotECG)
	case cal.Confidence < faintGridConfidence && ratio > axisMismatch:
		return fmt.Errorf("no ECG found: the only grid-like pattern (confidence %.2f) has squares %.0f %% longer one way than the other; check that the file shows an ECG printout, or give the scale with --dpi: %w", cal.Confidence, 100*ratio, calib.ErrNotECG)
	}
	return nil
}
