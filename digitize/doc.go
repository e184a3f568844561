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
// Time: seconds on the tracing's clock, 0 at the left edge of the first
// column of panels. The columns of a 3×4 printout are simultaneous 2.5 s
// windows of one clock and a rhythm strip runs on the same clock.
// Amplitudes: mV = (BaselineY − y) / (PxPerMM · GainMMPerMV).
package digitize
