// Package record holds the digitized electrocardiogram: leads as sampled
// signals in millivolts on the tracing's own clock, where the signals came
// from, and the hand corrections applied to them.
//
// Units: amplitudes in mV, time in seconds from the start of the tracing
// (time 0 is the left edge of the earliest panel), sample rates in Hz.
// A gap (a stretch that was not recorded, or erased by the user) is NaN.
//
// The package imports only the standard library so that every other
// package, the measurement engine included, can share it.
package record
