// Package model is the desktop app's state without any toolkit: the
// printout being read, its calibration and layout settings, the hand
// corrections with undo and redo, the measurements before and after each
// edit, and the project file kept beside the image. The Fyne screens in
// package gui are a thin layer over it, and its tests drive it with plain
// go test.
//
// Coordinates: image pixels of the rectified (upright, deskewed) printout,
// x to the right and y down, origin top-left; a pixel's centre is at
// (i+0.5, j+0.5). Tracing time is seconds from the left edge of the
// earliest panel; amplitudes are mV; gaps are NaN.
//
// The model is not safe for concurrent use: the app calls it on the UI
// goroutine. The slow step, Load, is a plain function that touches no
// model and runs in a goroutine under a cancellable context.
package model
