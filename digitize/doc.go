// Package digitize turns the ink of a calibrated ECG page into signals:
// it finds the rows and panels of the printout, assigns the leads, follows
// every trace as a path, and turns the pixel traces into millivolts on the
// tracing's clock. It also checks the limb leads against Einthoven's law
// and Goldberger's relations, which measure the digitization itself, and
// lists the places worth checking by hand.
//
// Coordinates: rectified page pixels from calib (x right, y down, origin
// top-left) at an isotropic scale of PxPerMM. A trace holds one sub-pixel
// centre y per pixel column, NaN where the trace is lost. Column x covers
// [x, x+1) and is sampled at its centre x+0.5.
//
// Reading a column: the path found by dynamic programming names the run
// of ink that holds the trace in each column. A line drawn with a round
// pen is its centre line swept by the pen's disc, so each column's top
// and bottom edges (to a fraction of a pixel from the coverage summed
// across them) bound the centre line once eroded by that disc: the top
// edge from above, tight at peaks and along strokes; the bottom edge from
// below, tight at troughs and along strokes. Where the bounds meet the
// centre line lies between them; where they part the column holds a tip,
// and the flanks say whether a peak or a trough. The pen's half width is
// measured across flat stretches (slope divided out); the round caps at
// the trace ends take the thinnest stretch's.
//
// Printed text: a page without calibration pulses has its speed and gain
// read from its text ("25 mm/s", "10 mm/mV"), and a lone strip its lead
// from its label. Both are read from glyph shapes that no typeface
// decides (the slash between letters, upright strokes, a V, which way a
// digit's stroke runs), never matched against a font; a reading that
// fails leaves the assumed setting or II, and one that succeeds is
// reported in the warnings for checking.
//
// Time: seconds on the tracing's clock, 0 at the left edge of the first
// column of panels. The columns of a 3×4 printout are simultaneous 2.5 s
// windows of one clock and a rhythm strip runs on the same clock.
// Amplitudes: mV = (BaselineY − y) / (PxPerMM · GainMMPerMV).
package digitize
