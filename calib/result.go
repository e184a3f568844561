package calib

import (
	"errors"
	"image"
)

// Page is a decoded input image (one page of a multi-page file).
type Page struct {
	Image     image.Image
	Path      string
	SHA256    string // of the file's bytes, hex
	Format    string // png, jpeg, tiff, pdf
	PageIndex int    // 0-based page within the file
	PageCount int
	DPIX      float64 // resolution stated by the file, 0 when unknown
	DPIY      float64
	// Stated is the resolution as the file states it, and how the page was
	// resampled to square pixels when the two axes differ (a fax at
	// 204 × 98 dpi); DPIX and DPIY are then those of the resampled image.
	Stated Resolution
}

// Options steer detection. The zero value detects everything.
type Options struct {
	// UserPxPerMM or UserDPI give a scale by hand; used when neither the
	// grid nor a calibration pulse yields one (and always when ForceUser).
	UserPxPerMM float64
	UserDPI     float64
	ForceUser   bool
	// Stated settings printed on the page or given by the user; 0 means
	// unknown (10 mm/mV and 25 mm/s are then assumed unless a pulse says
	// otherwise). A pulse that disagrees is reported in Warnings.
	StatedGainMMPerMV float64
	StatedSpeedMMPerS float64
	// Trace, when set, is told each step of the grid search, one line a
	// call (a format and its arguments, as fmt.Printf takes them), for a
	// person looking into how a page was read; nil in normal use.
	Trace func(format string, a ...any) `json:"-"`
}

// Pulse is a calibration pulse found on the rectified page.
type Pulse struct {
	Box      [4]float64 `json:"box"` // x0, y0, x1, y1 in rectified px
	HeightMM float64    `json:"height_mm"`
	WidthMM  float64    `json:"width_mm"`
}

// Result is what the paper tells us: an upright, deskewed,
// perspective-corrected page at a known isotropic scale, the ink on it,
// and the recording settings.
type Result struct {
	Rectified *image.NRGBA // upright page, PxPerMM on both axes
	Ink       *image.Gray  // same geometry: 255 = trace ink, 0 = paper or grid
	PxPerMM   float64      // scale of Rectified and Ink

	PxPerMMX    float64 // scale along the paper's time axis in the original image
	PxPerMMY    float64 // scale along the paper's amplitude axis in the original image
	RotationDeg float64 // page rotation in the original image, degrees, counter-clockwise positive
	Turned      int     // quarter turns (0..3) applied to make the page upright

	GainMMPerMV float64
	SpeedMMPerS float64
	GainFrom    string  // where the gain came from: GainPulse, GainRowPulses, GainPrinted, GainStated or GainAssumed
	SpeedFrom   string  // where the speed came from: SpeedPulse, SpeedPrinted, SpeedStated or SpeedAssumed ("" where calib did not settle it)
	Source      string  // "grid", "pulse", "user", "file" (no grid or pulse; the file's stated dpi) or "page" (a fax with no grid or pulse; the sheet's size): where the scale came from
	Confidence  float64 // 0..1
	Pulses      []Pulse
	// Bilevel is true when nearly every pixel of the picture is black or
	// white (a fax, a thresholded scan): thin strokes there lose or gain
	// a pixel at every edge.
	Bilevel bool

	// RectToImage maps rectified px (x, y, 1) to original image px
	// (row-major 3×3 homography), for drawing overlays on the source.
	RectToImage [9]float64
	Warnings    []string

	// ScaleAt is the original-image pixel where PxPerMMX, PxPerMMY and
	// RotationDeg were taken (the middle of the tracing); under
	// perspective they change across the page.
	ScaleAt [2]float64
}

// Expected failures.
var (
	ErrNotECG  = errors.New("calib: no ECG grid or trace found")
	ErrNoScale = errors.New("calib: no grid or calibration pulse found; give the scale by hand (a dpi, or two points a known distance apart)")
	ErrTooBig  = errors.New("calib: image exceeds the pixel budget")
	ErrFormat  = errors.New("calib: unsupported or damaged image file")
)

// SettingsAssumed reports that the gain and speed were not measured: no
// calibration pulse of a standard height was read (none was found, or
// the candidates' height is no standard gain; see pulseGain, which
// settleSettings decides by), and the user did not give
// the scale. GainMMPerMV and SpeedMMPerS are then the stated or usual
// values, and the page's printed settings may stand in for them.
func (r *Result) SettingsAssumed() bool {
	if r == nil || r.Source == "user" {
		return false
	}
	if len(r.Pulses) == 0 {
		return true
	}
	_, _, _, ok := pulseGain(r.Pulses)
	return !ok
}
