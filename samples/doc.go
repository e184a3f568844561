// Package samples draws ECG printouts with known truth, degrades them the
// way scanners, phones, photocopiers and fax machines do, and ships a few
// demo printouts made from invented signals.
//
// Coordinates: image pixels with x to the right and y down, origin at the
// top-left corner, continuous: pixel (i, j) covers [i, i+1) × [j, j+1), so
// its centre is (i+0.5, j+0.5). Paper lengths are millimetres, amplitudes
// millivolts, times seconds on the tracing's clock (time 0 = left edge of
// the earliest panel's time window). Rotation angles are degrees,
// counter-clockwise positive as seen on the image.
//
// Everything here is synthetic. Nothing is a real patient, clinic or
// device.
package samples
