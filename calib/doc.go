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
// How the grid is measured: the picture is reduced to about 1800 px on
// its long side; the grid's angle comes from the 2-D spectrum of a
// central patch; the page is cut into square tiles in the grid's frame and
// each tile is projected onto both grid axes (ink left out). The summed
// tile spectra give the line period and whether 1 mm lines sit under a
// 5 mm period; each tile's phase at the local period gives the paper
// coordinate of the tile modulo one period; the periods are unwrapped
// from tile to tile and a homography (perspective, rotation and the two
// axis scales in one) is fitted to all tiles robustly and refitted after
// re-choosing each tile's whole periods from the model.
//
// Result fields beyond the shared contract: RotationDeg is the page's skew
// in (−45°, 45°]; Turned counts the counter-clockwise quarter turns applied
// on top to make the traces read left to right; ScaleAt is where under
// perspective PxPerMMX, PxPerMMY and RotationDeg hold. Source is "grid",
// "pulse" (no grid: the pulse read at the likeliest standard settings),
// "user" (a scale given by hand), "file" (no grid or pulse: the
// resolution the file states) or "page" (a fax with neither: the picture's
// size over an A4 or Letter sheet's).
//
// OpenCV (through gocv) does the resampling; Mats stay inside this package
// and pixels leave it as Go images.
package calib
