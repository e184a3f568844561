// Package axis is tracelift's measurement engine: it finds the beats of a
// record, builds a representative (median) beat per lead, places the
// global fiducials (P onset and offset, QRS onset and offset, T end) and
// from them derives the rate, the intervals with their corrected QT, the
// frontal axes of P, QRS and T by three methods, the precordial transition
// and a few screening flags, each value with an uncertainty.
//
// Units: time in seconds on the record's clock (Signal.StartS), intervals
// in milliseconds, amplitudes in millivolts, areas in mV·ms, angles in
// degrees on the hexaxial circle (0° = lead I, +90° = aVF, positive angles
// clockwise as the trade draws them, range (−180°, +180°]). Gaps are NaN
// in the input and NaN (JSON null) in the output where a value could not
// be measured.
//
// The package is pure Go plus gonum: it never imports an image package.
//
// Not a diagnostic device; every measurement is to be reviewed by a
// qualified clinician; local protocols and licensed practice come first.
package axis
