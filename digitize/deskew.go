package digitize

// A rotation calibration left on the page shows twice in the traces:
// the rows' time origins drift sideways down the page (the shear the time
// base fits) and each baseline climbs or falls across the page. The
// first moves every row's clock, which the time base absorbs; the second
// adds a ramp to every lead, which nothing downstream removes. Turning
// the page by the residual angle removes both: Run proposes it
// (calib.AdjustStraighten) and calib carries it out.

// minDeskewDeg is the smallest residual rotation corrected: below it the
// baseline ramp over a 250 mm row stays under 0.45 mm (0.045 mV at
// 10 mm/mV).
const minDeskewDeg = 0.1

// maxDeskewDeg is the largest: more than that is not a residual of a
// calibrated page but a misread origin line.
const maxDeskewDeg = 1.5
