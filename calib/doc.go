// Package calib loads a picture of a paper ECG and finds what the paper
// says about scale: the page, its grid, pixels per millimetre along each
// paper axis, the skew, quarter turns and perspective of the page, and the
// calibration pulses (gain in mm/mV, paper speed in mm/s).
//
// Coordinates: image pixels, x right, y down, origin at the top-left
// pixel's centre. Paper coordinates are millimetres in the same
// orientation once the page is upright: x is the time axis, y the
// amplitude axis pointing down. Result.Rectified and Result.Ink share one
// geometry at Result.PxPerMM on both axes; Result.RectToImage maps their
// pixels back to the source picture.
//
// OpenCV (through gocv) does the resampling; Mats stay inside this package
// and pixels leave it as Go images.
package calib
