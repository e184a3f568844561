package samples

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/jpeg"
	"math"
	"math/rand"
	"runtime"
	"sync"
)

// Degradation says how a printout is spoiled. Zero fields do nothing.
// The same Degradation (with the same Seed) gives the same image.
type Degradation struct {
	Name        string  // preset name, copied to Truth.Condition ("" = "custom")
	RotationDeg float64 // counter-clockwise positive
	// Perspective 0..1: a phone photo, the page seen at a slant and
	// smaller than the frame, with a table around it.
	Perspective float64
	Light       float64 // 0..1 uneven light (gradient and vignette)
	BlurPx      float64 // Gaussian blur sigma in output px
	JPEGQuality int     // 1..100; 0 = no JPEG round trip
	// Fax binarizes at 200 dpi across and 100 dpi down (the fax
	// standard's normal resolution, from memory), so the output is
	// anisotropic.
	Fax     bool
	Grey    bool    // drop colour (photocopy)
	Fade    float64 // 0..1 toward white (faded thermal paper)
	Speckle float64 // fraction of pixels hit by dust or toner specks
	Creases int     // folds across the page
	Seed    int64

	// FaxDPIX and FaxDPIY are the fax's resolution across and down
	// (0: 200 × 100). FaxGridDrop sets the fax's contrast so that the
	// pale grid drops out before the page is binarised.
	FaxDPIX, FaxDPIY float64
	FaxGridDrop      bool
	// Curl 0..1 curls the sheet's short edges up off the table (a Bend,
	// Truth.Bend), seen by a camera: use with Perspective.
	Curl float64
	// Shadow 0..1 lays a hand's shadow across the frame; Glare 0..1 a
	// lamp's washed-out reflection (its box in Truth.Washed).
	Shadow, Glare float64
	// DarkTable puts the page smaller in the frame on a dark table.
	DarkTable bool
	// ChatApp sends the picture through a messaging app: scaled down to
	// fit 1600 × 1200, motion-blurred by MotionPx, JPEG at JPEGQuality
	// with chroma halved (Go's encoder writes 4:2:0); the file's bytes
	// are kept in Printout.Encoded.
	ChatApp  bool
	MotionPx float64
	// Marks lays that many stamps and pen marks over the traces
	// (Truth.Marks); the page must be a clean render.
	Marks int
	// Cover puts a fax cover sheet before the ECG page (Printout.Cover;
	// the ECG is page 2 of the file). FileTIFF asks SuiteCase.File for a
	// TIFF that carries the fax's resolution.
	Cover, FileTIFF bool
}

// Conditions lists the classic preset names for Condition.
var Conditions = []string{"clean", "rotated", "photocopy", "photo", "fax"}

// HardConditions lists the further presets: faxes whose grid is gone
// (100–204 dpi, non-square pixels), fax documents with a cover sheet,
// faded thermal paper, curled sheets photographed, a hand's shadow and a
// lamp's glare, chat-app photos, faint grids on dark tables, stamps and
// pen marks over the traces.
var HardConditions = []string{"faxlost", "faxdoc", "thermal", "curled", "shadow", "chatapp", "darktable", "marks"}

// AllConditions is Conditions followed by HardConditions.
var AllConditions = append(append([]string(nil), Conditions...), HardConditions...)

// faxResolutions are fax resolutions in use (dpi across × down): the
// standard and fine modes in both their metric and inch forms, and plain
// square scans (common practice).
var faxResolutions = [][2]float64{{200, 100}, {204, 98}, {204, 196}, {200, 200}, {150, 150}, {100, 100}, {204, 98}}

// Condition draws a preset degradation: "clean", "rotated", "photocopy",
// "photo" or "fax". An unknown name gives a Degradation that Degrade
// rejects.
func Condition(name string, rng *rand.Rand) Degradation {
	u := func(lo, hi float64) float64 { return lo + (hi-lo)*rng.Float64() }
	sgn := func() float64 {
		if rng.Intn(2) == 0 {
			return -1
		}
		return 1
	}
	d := Degradation{Name: name, Seed: rng.Int63()}
	switch name {
	case "clean":
	case "rotated":
		d.RotationDeg = sgn() * u(0.5, 6)
		d.Light = u(0, 0.1)
	case "photocopy":
		d.Grey = true
		d.RotationDeg = sgn() * u(0, 2)
		d.Fade = u(0.05, 0.3)
		d.Speckle = u(0.0002, 0.0015)
		d.BlurPx = u(0.5, 1.0)
		d.Light = u(0.03, 0.15)
		d.Creases = rng.Intn(2)
	case "photo":
		d.Perspective = u(0.3, 0.9)
		d.RotationDeg = sgn() * u(0, 6)
		d.Light = u(0.2, 0.55)
		d.BlurPx = u(0.6, 1.5)
		d.JPEGQuality = 65 + rng.Intn(26)
		d.Creases = rng.Intn(3)
	case "fax":
		d.Fax = true
		d.RotationDeg = sgn() * u(0, 1.5)
		d.Speckle = u(0.0003, 0.002)
	case "faxlost", "faxdoc":
		d.Fax = true
		d.RotationDeg = sgn() * u(0, 1.5)
		d.Speckle = u(0.0003, 0.002)
		r := faxResolutions[rng.Intn(len(faxResolutions))]
		d.FaxDPIX, d.FaxDPIY = r[0], r[1]
		d.FaxGridDrop = rng.Float64() < 0.8
		d.FileTIFF = name == "faxdoc" || rng.Float64() < 0.7
		d.Cover = name == "faxdoc"
	case "thermal":
		d.Fade = u(0.1, 0.45)
		d.RotationDeg = sgn() * u(0, 2)
		d.Light = u(0, 0.12)
		d.BlurPx = u(0.3, 0.9)
	case "curled":
		d.Perspective = u(0.3, 0.7)
		d.RotationDeg = sgn() * u(0, 5)
		d.Light = u(0.1, 0.4)
		d.BlurPx = u(0.5, 1.2)
		d.JPEGQuality = 70 + rng.Intn(21)
		d.Curl = u(0.4, 1)
	case "shadow":
		d.Perspective = u(0.2, 0.7)
		d.RotationDeg = sgn() * u(0, 5)
		d.Light = u(0.1, 0.35)
		d.BlurPx = u(0.5, 1.2)
		d.JPEGQuality = 70 + rng.Intn(21)
		switch rng.Intn(3) {
		case 0:
			d.Shadow = u(0.3, 0.6)
		case 1:
			d.Glare = u(0.6, 1)
		default:
			d.Shadow, d.Glare = u(0.3, 0.6), u(0.6, 1)
		}
	case "chatapp":
		d.Perspective = u(0.2, 0.8)
		d.RotationDeg = sgn() * u(0, 6)
		d.Light = u(0.1, 0.45)
		d.BlurPx = u(0.2, 0.6)
		d.ChatApp = true
		d.JPEGQuality = 40 + rng.Intn(17)
		d.MotionPx = u(0.8, 3)
	case "darktable":
		d.Perspective = u(0.3, 0.8)
		d.RotationDeg = sgn() * u(0, 6)
		d.Light = u(0.1, 0.4)
		d.BlurPx = u(0.5, 1.2)
		d.JPEGQuality = 70 + rng.Intn(21)
		d.DarkTable = true
	case "marks":
		d.Marks = 2 + rng.Intn(4)
		d.RotationDeg = sgn() * u(0, 1.5)
		d.Light = u(0, 0.08)
	}
	return d
}

func knownCondition(n string) bool {
	if n == "" || n == "custom" {
		return true
	}
	for _, c := range AllConditions {
		if c == n {
			return true
		}
	}
	return false
}

// Degrade returns a spoiled copy of p, with Truth.PageToImage,
// PxPerMMX/Y, RotationDeg and Condition updated. p is not changed.
func Degrade(p *Printout, d Degradation) (*Printout, error) {
	if p == nil || p.Image == nil || p.Image.Rect.Empty() {
		return nil, errors.New("samples: nothing to degrade")
	}
	if !knownCondition(d.Name) {
		return nil, fmt.Errorf("samples: unknown condition %q (want one of %v)", d.Name, AllConditions)
	}
	for _, v := range []float64{d.RotationDeg, d.Perspective, d.Light, d.BlurPx, d.Fade, d.Speckle, d.FaxDPIX, d.FaxDPIY, d.Curl, d.Shadow, d.Glare, d.MotionPx} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, errors.New("samples: degradation has a NaN or infinite value")
		}
	}
	switch {
	case d.Perspective < 0 || d.Perspective > 1, d.Light < 0 || d.Light > 1, d.Fade < 0 || d.Fade > 1:
		return nil, errors.New("samples: perspective, light and fade must lie in 0..1")
	case d.BlurPx < 0 || d.BlurPx > 20, d.Speckle < 0 || d.Speckle > 0.1:
		return nil, errors.New("samples: blur must lie in 0..20 px and speckle in 0..0.1")
	case d.JPEGQuality < 0 || d.JPEGQuality > 100, d.Creases < 0 || d.Creases > 20:
		return nil, errors.New("samples: JPEG quality must lie in 0..100 and creases in 0..20")
	case math.Abs(d.RotationDeg) > 45:
		return nil, errors.New("samples: rotation beyond ±45° is not supported")
	case d.Curl < 0 || d.Curl > 1, d.Shadow < 0 || d.Shadow > 1, d.Glare < 0 || d.Glare > 1:
		return nil, errors.New("samples: curl, shadow and glare must lie in 0..1")
	case d.MotionPx < 0 || d.MotionPx > 30, d.Marks < 0 || d.Marks > 30:
		return nil, errors.New("samples: motion blur must lie in 0..30 px and marks in 0..30")
	case d.FaxDPIX < 0 || d.FaxDPIX > 600 || d.FaxDPIY < 0 || d.FaxDPIY > 600:
		return nil, errors.New("samples: fax resolution must lie in 0..600 dpi")
	case (d.Curl > 0 || d.Marks > 0) && (p.Truth.PageToImage != Identity || p.Truth.Bend != nil):
		return nil, errors.New("samples: curl and marks need a clean render, not a page already degraded")
	case d.ChatApp && d.JPEGQuality == 0:
		return nil, errors.New("samples: a chat-app picture needs a JPEG quality")
	}
	rng := rand.New(rand.NewSource(d.Seed))
	img := cloneNRGBA(p.Image)
	tr := p.Truth
	tr.Condition = d.Name
	if tr.Condition == "" {
		tr.Condition = "custom"
	}
	// Paper-level damage first.
	if d.Grey {
		greyInPlace(img)
	}
	if d.Fade > 0 {
		fadeInPlace(img, d.Fade)
	}
	for i := 0; i < d.Creases; i++ {
		crease(img, rng)
	}
	// The further looks draw from a source of their own, so that the
	// classic presets' draws stay as they were.
	rng2 := rand.New(rand.NewSource(d.Seed ^ 0x2545F4914F6CDD1D))
	if d.Marks > 0 {
		tr.Marks = addMarks(img, tr, d.Marks, rng2)
	}
	var bend *Bend
	if d.Curl > 0 {
		bend = newBend(float64(img.Rect.Dx()), float64(img.Rect.Dy()), d.Curl, rng2)
		shadeCurl(img, bend, rng2.Float64()*2-1)
	}
	if d.Fax && d.FaxGridDrop {
		dropGrid(img, 30+20*rng2.Float64(), 120+25*rng2.Float64())
	}
	// Geometry.
	W, H := float64(img.Rect.Dx()), float64(img.Rect.Dy())
	var hm [9]float64
	outW, outH := img.Rect.Dx(), img.Rect.Dy()
	var bg func(x, y int) color.NRGBA
	geom := false
	switch {
	case d.Perspective > 0:
		// The page fills most of the frame, turned and slanted; it is
		// shrunk until all four corners are inside the frame.
		s := 0.88 - 0.1*d.Perspective*rng.Float64()
		if d.DarkTable {
			s = 0.6 + 0.2*rng2.Float64()
		}
		if bend != nil {
			s *= 0.95 // the lifted edges stand out past the flat page's corners
		}
		cx, cy := W/2+W*0.03*(rng.Float64()-0.5), H/2+H*0.03*(rng.Float64()-0.5)
		a := d.RotationDeg * math.Pi / 180
		ca, sa := math.Cos(a), math.Sin(a)
		src := [4][2]float64{{0, 0}, {W, 0}, {W, H}, {0, H}}
		j := d.Perspective * 0.05 * math.Min(W, H)
		// Keystone: one side nearer the camera than the other.
		key := d.Perspective * 0.08 * (rng.Float64()*2 - 1)
		var jit [4][2]float64
		for k := range jit {
			jit[k] = [2]float64{j * (rng.Float64()*2 - 1), j * (rng.Float64()*2 - 1)}
		}
		var dst [4][2]float64
		for ; s > 0.3; s *= 0.97 {
			inside := true
			for k, c := range src {
				x, y := (c[0]-W/2)*s, (c[1]-H/2)*s
				if k == 0 || k == 1 {
					x *= 1 - key
				} else {
					x *= 1 + key
				}
				x += jit[k][0] * s
				y += jit[k][1] * s
				// Counter-clockwise on the image (y down).
				dst[k] = [2]float64{cx + x*ca + y*sa, cy - x*sa + y*ca}
				if dst[k][0] < 0.02*W || dst[k][0] > 0.98*W || dst[k][1] < 0.02*H || dst[k][1] > 0.98*H {
					inside = false
				}
			}
			if inside {
				break
			}
		}
		var err error
		hm, err = quadHomography(src, dst)
		if err != nil {
			return nil, fmt.Errorf("samples: %w", err)
		}
		base := [3]float64{60 + 60*rng.Float64(), 50 + 50*rng.Float64(), 40 + 40*rng.Float64()}
		if d.DarkTable {
			k := 0.15 + 0.25*rng2.Float64()
			base = [3]float64{base[0] * k, base[1] * k, base[2] * k}
		}
		gx, gy := rng.Float64()*2-1, rng.Float64()*2-1
		bg = func(x, y int) color.NRGBA {
			f := 1 + 0.25*(gx*(float64(x)/W-0.5)+gy*(float64(y)/H-0.5))
			return color.NRGBA{clamp8(base[0] * f), clamp8(base[1] * f), clamp8(base[2] * f), 255}
		}
		geom = true
	case d.RotationDeg != 0:
		a := d.RotationDeg * math.Pi / 180
		ca, sa := math.Cos(a), math.Sin(a)
		outW = int(math.Ceil(W*math.Abs(ca) + H*math.Abs(sa)))
		outH = int(math.Ceil(W*math.Abs(sa) + H*math.Abs(ca)))
		ox, oy := float64(outW)/2, float64(outH)/2
		// x' = ox + (x−W/2)cos + (y−H/2)sin ; y' = oy − (x−W/2)sin + (y−H/2)cos
		hm = [9]float64{
			ca, sa, ox - W/2*ca - H/2*sa,
			-sa, ca, oy + W/2*sa - H/2*ca,
			0, 0, 1,
		}
		lid := color.NRGBA{238, 238, 236, 255} // scanner lid
		bg = func(int, int) color.NRGBA { return lid }
		geom = true
	default:
		hm = Identity
	}
	if d.Fax {
		// Resample straight to 200 × 100 dpi of paper.
		clean := tr.PxPerMMX
		if tr.CleanPxPerMM > 0 {
			clean = tr.CleanPxPerMM
		}
		dx, dy := 200.0, 100.0
		if d.FaxDPIX > 0 && d.FaxDPIY > 0 {
			dx, dy = d.FaxDPIX, d.FaxDPIY
		}
		fx := dx / 25.4 / clean
		fy := dy / 25.4 / clean
		if !geom {
			bg = func(int, int) color.NRGBA { return color.NRGBA{255, 255, 255, 255} }
		}
		// Smooth first so the coarse sampling does not alias.
		sx, sy := 0.45/fx, 0.45/fy
		if sx > 0.6 || sy > 0.6 {
			img = gaussBlur(img, math.Max(sx-0.3, 0), math.Max(sy-0.3, 0))
		}
		hm = mul3([9]float64{fx, 0, 0, 0, fy, 0, 0, 0, 1}, hm)
		outW = max(1, int(math.Round(float64(outW)*fx)))
		outH = max(1, int(math.Round(float64(outH)*fy)))
		geom = true
	}
	if d.ChatApp {
		// Scaled to fit the app's 1600 × 1200 frame (either way up).
		long, short := float64(max(outW, outH)), float64(min(outW, outH))
		sc := math.Min(1, math.Min(1600/long, 1200/short))
		if sc < 1 {
			if sc < 0.8 {
				img = gaussBlur(img, 0.4/sc, 0.4/sc)
			}
			hm = mul3([9]float64{sc, 0, 0, 0, sc, 0, 0, 0, 1}, hm)
			outW = max(1, int(math.Round(float64(outW)*sc)))
			outH = max(1, int(math.Round(float64(outH)*sc)))
			geom = true
			if bg == nil {
				bg = func(int, int) color.NRGBA { return color.NRGBA{255, 255, 255, 255} }
			}
		}
	}
	if bend != nil {
		inv, ok := Invert(hm)
		if !ok {
			return nil, errors.New("samples: singular page transform")
		}
		if bg == nil {
			bg = func(int, int) color.NRGBA { return color.NRGBA{90, 80, 70, 255} }
		}
		if float64(outW)*float64(outH) > 80e6 {
			return nil, errors.New("samples: warped image would be too large")
		}
		img = warpFunc(img, outW, outH, func(x, y float64) (float64, float64) {
			u, v := Apply(inv, x, y)
			return bend.Inverse(u, v)
		}, bg)
		tr.Bend = bend
	} else if geom {
		var err error
		img, err = warp(img, hm, outW, outH, bg)
		if err != nil {
			return nil, err
		}
	}
	if d.Light > 0 {
		unevenLight(img, d.Light, rng)
	}
	if d.BlurPx > 0 && !d.Fax {
		img = gaussBlur(img, d.BlurPx, d.BlurPx)
	}
	if d.Shadow > 0 {
		handShadow(img, d.Shadow, rng2)
	}
	if d.Glare > 0 {
		tr.Washed = append(tr.Washed, glare(img, d.Glare, rng2))
	}
	if d.MotionPx > 0 {
		img = motionBlur(img, d.MotionPx, rng2.Float64()*math.Pi)
	}
	if d.Speckle > 0 {
		speckle(img, d.Speckle, rng)
	}
	if d.Fax {
		binarize(img, 105+30*rng.Float64())
	}
	var encoded []byte
	if d.ChatApp {
		var buf bytes.Buffer
		if err := jpeg.Encode(&buf, opaqueRGBA(img), &jpeg.Options{Quality: d.JPEGQuality}); err != nil {
			return nil, fmt.Errorf("samples: jpeg: %w", err)
		}
		encoded = buf.Bytes()
		dec, err := jpeg.Decode(bytes.NewReader(encoded))
		if err != nil {
			return nil, fmt.Errorf("samples: jpeg: %w", err)
		}
		img = toNRGBA(dec)
	} else if d.JPEGQuality > 0 && !d.Fax {
		var buf bytes.Buffer
		if err := jpeg.Encode(&buf, opaqueRGBA(img), &jpeg.Options{Quality: d.JPEGQuality}); err != nil {
			return nil, fmt.Errorf("samples: jpeg: %w", err)
		}
		dec, err := jpeg.Decode(&buf)
		if err != nil {
			return nil, fmt.Errorf("samples: jpeg: %w", err)
		}
		img = toNRGBA(dec)
	}
	// Truth geometry: compose with what the page had before.
	if tr.CleanPxPerMM == 0 {
		tr.CleanPxPerMM = tr.PxPerMMX
	}
	tr.PageToImage = mul3(hm, tr.PageToImage)
	cx, cy := 0.0, 0.0
	for _, pn := range tr.Panels {
		cx += (pn.Box[0] + pn.Box[2]) / 2
		cy += (pn.Box[1] + pn.Box[3]) / 2
	}
	if n := float64(len(tr.Panels)); n > 0 {
		cx, cy = cx/n, cy/n
	} else {
		cx, cy = W/2, H/2 // approximate when the input was degraded already
	}
	jx, jy, kx, ky := jacobianOf(tr.ToImage, cx, cy)
	tr.PxPerMMX = math.Hypot(jx, jy) * tr.CleanPxPerMM
	tr.PxPerMMY = math.Hypot(kx, ky) * tr.CleanPxPerMM
	tr.RotationDeg = -math.Atan2(jy, jx) * 180 / math.Pi
	out := &Printout{Image: img, Truth: tr, Encoded: encoded, Cover: p.Cover}
	if d.Fax && d.FileTIFF {
		out.Truth.FileDPIX, out.Truth.FileDPIY = 200, 100
		if d.FaxDPIX > 0 && d.FaxDPIY > 0 {
			out.Truth.FileDPIX, out.Truth.FileDPIY = d.FaxDPIX, d.FaxDPIY
		}
	}
	if d.Cover && d.Fax {
		// A portrait cover sheet as wide as the ECG page, at the fax's
		// resolution.
		fdx, fdy := out.Truth.FileDPIX, out.Truth.FileDPIY
		if fdx == 0 {
			fdx, fdy = 200, 100
			if d.FaxDPIX > 0 && d.FaxDPIY > 0 {
				fdx, fdy = d.FaxDPIX, d.FaxDPIY
			}
		}
		cw := img.Rect.Dx()
		chSq := int(float64(cw) * 297 / 210)
		sq := coverSheet(cw, chSq, fdx/25.4, rng2)
		if fdy != fdx {
			ch := max(1, int(math.Round(float64(chSq)*fdy/fdx)))
			var err error
			if fdy < fdx {
				sq = gaussBlur(sq, 0, 0.45*fdx/fdy-0.3)
			}
			sq, err = warp(sq, [9]float64{1, 0, 0, 0, fdy / fdx, 0, 0, 0, 1}, cw, ch, func(int, int) color.NRGBA { return color.NRGBA{255, 255, 255, 255} })
			if err != nil {
				return nil, err
			}
		}
		speckle(sq, d.Speckle, rng2)
		binarize(sq, 128)
		out.Cover = sq
		out.Truth.PageIndex, out.Truth.PageCount = 1, 2
	}
	return out, nil
}

// jacobianOf returns the images of the unit x and y steps at (x, y)
// under any map.
func jacobianOf(f func(x, y float64) (float64, float64), x, y float64) (jx, jy, kx, ky float64) {
	const e = 0.5
	x0, y0 := f(x-e, y)
	x1, y1 := f(x+e, y)
	x2, y2 := f(x, y-e)
	x3, y3 := f(x, y+e)
	return (x1 - x0) / (2 * e), (y1 - y0) / (2 * e), (x3 - x2) / (2 * e), (y3 - y2) / (2 * e)
}

// dropGrid maps luma through a levels curve (lo → black, hi → white) and
// drops the colour: a fax's contrast setting under which the pale grid
// vanishes and the dark trace stays.
func dropGrid(img *image.NRGBA, lo, hi float64) {
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride : y*img.Stride+4*img.Rect.Dx()]
			for i := 0; i < len(row); i += 4 {
				l := (299*float64(row[i]) + 587*float64(row[i+1]) + 114*float64(row[i+2])) / 1000
				v := clamp8(255 * (l - lo) / (hi - lo))
				row[i], row[i+1], row[i+2] = v, v, v
			}
		}
	})
}

// Apply maps (x, y) by the homography h.
func Apply(h [9]float64, x, y float64) (float64, float64) {
	w := h[6]*x + h[7]*y + h[8]
	return (h[0]*x + h[1]*y + h[2]) / w, (h[3]*x + h[4]*y + h[5]) / w
}

// jacobian returns the images of the unit x and y steps at (x, y).
func jacobian(h [9]float64, x, y float64) (jx, jy, kx, ky float64) {
	const e = 0.5
	x0, y0 := Apply(h, x-e, y)
	x1, y1 := Apply(h, x+e, y)
	x2, y2 := Apply(h, x, y-e)
	x3, y3 := Apply(h, x, y+e)
	return (x1 - x0) / (2 * e), (y1 - y0) / (2 * e), (x3 - x2) / (2 * e), (y3 - y2) / (2 * e)
}

func mul3(a, b [9]float64) [9]float64 {
	var c [9]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			for k := 0; k < 3; k++ {
				c[3*i+j] += a[3*i+k] * b[3*k+j]
			}
		}
	}
	return c
}

// Invert returns the inverse of a 3×3 map as Apply takes it (row-major,
// homogeneous); ok is false when it is singular.
func Invert(m [9]float64) ([9]float64, bool) {
	a, b, c, d, e, f, g, h, i := m[0], m[1], m[2], m[3], m[4], m[5], m[6], m[7], m[8]
	A, B, C := e*i-f*h, -(d*i - f*g), d*h-e*g
	det := a*A + b*B + c*C
	if math.Abs(det) < 1e-15 {
		return m, false
	}
	r := [9]float64{A, -(b*i - c*h), b*f - c*e, B, a*i - c*g, -(a*f - c*d), C, -(a*h - b*g), a*e - b*d}
	for k := range r {
		r[k] /= det
	}
	return r, true
}

// quadHomography solves for the homography taking src[k] to dst[k].
func quadHomography(src, dst [4][2]float64) ([9]float64, error) {
	var a [8][9]float64
	for k := 0; k < 4; k++ {
		x, y, u, v := src[k][0], src[k][1], dst[k][0], dst[k][1]
		a[2*k] = [9]float64{x, y, 1, 0, 0, 0, -u * x, -u * y, u}
		a[2*k+1] = [9]float64{0, 0, 0, x, y, 1, -v * x, -v * y, v}
	}
	// Gaussian elimination with partial pivoting.
	for c := 0; c < 8; c++ {
		p := c
		for r := c + 1; r < 8; r++ {
			if math.Abs(a[r][c]) > math.Abs(a[p][c]) {
				p = r
			}
		}
		if math.Abs(a[p][c]) < 1e-12 {
			return Identity, errors.New("degenerate page corners")
		}
		a[c], a[p] = a[p], a[c]
		for r := 0; r < 8; r++ {
			if r == c {
				continue
			}
			f := a[r][c] / a[c][c]
			for k := c; k < 9; k++ {
				a[r][k] -= f * a[c][k]
			}
		}
	}
	var h [9]float64
	for i := 0; i < 8; i++ {
		h[i] = a[i][8] / a[i][i]
	}
	h[8] = 1
	return h, nil
}

// parallelRows runs f over row bands on every CPU.
func parallelRows(n int, f func(y0, y1 int)) {
	w := runtime.GOMAXPROCS(0)
	if w > n {
		w = max(n, 1)
	}
	var wg sync.WaitGroup
	for i := 0; i < w; i++ {
		y0, y1 := n*i/w, n*(i+1)/w
		wg.Add(1)
		go func() {
			defer wg.Done()
			f(y0, y1)
		}()
	}
	wg.Wait()
}

// bilinearOrBg sets p's colour to src sampled bilinearly at (u, v),
// where neighbours outside src contribute bg(x, y), the background at the
// destination pixel (x, y).
func bilinearOrBg(p []uint8, src *image.NRGBA, u, v float64, bg func(x, y int) color.NRGBA, x, y int) {
	sw, sh := src.Rect.Dx(), src.Rect.Dy()
	ix, iy := int(math.Floor(u)), int(math.Floor(v))
	var acc [3]float64
	var inside float64
	for k := 0; k < 4; k++ {
		xx, yy := ix+k&1, iy+k>>1
		if xx < 0 || yy < 0 || xx >= sw || yy >= sh {
			continue
		}
		wt := (1 - math.Abs(float64(xx)-u)) * (1 - math.Abs(float64(yy)-v))
		o := yy*src.Stride + xx*4
		acc[0] += wt * float64(src.Pix[o])
		acc[1] += wt * float64(src.Pix[o+1])
		acc[2] += wt * float64(src.Pix[o+2])
		inside += wt
	}
	if inside < 1-1e-9 {
		c := bg(x, y)
		o := 1 - inside
		acc[0] += o * float64(c.R)
		acc[1] += o * float64(c.G)
		acc[2] += o * float64(c.B)
	}
	p[0], p[1], p[2] = clamp8(acc[0]), clamp8(acc[1]), clamp8(acc[2])
}

// warp resamples src through homography h (src px -> dst px) bilinearly
// into a w × h image; points outside the page take bg.
func warp(src *image.NRGBA, hm [9]float64, w, h int, bg func(x, y int) color.NRGBA) (*image.NRGBA, error) {
	if float64(w)*float64(h) > 80e6 {
		return nil, errors.New("samples: warped image would be too large")
	}
	inv, ok := Invert(hm)
	if !ok {
		return nil, errors.New("samples: singular page transform")
	}
	dst := image.NewNRGBA(image.Rect(0, 0, w, h))
	sw, sh := src.Rect.Dx(), src.Rect.Dy()
	stride := src.Stride
	parallelRows(h, func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := dst.Pix[y*dst.Stride:]
			fy := float64(y) + 0.5
			// Homogeneous source coordinates step linearly along a row.
			un := inv[0]*0.5 + inv[1]*fy + inv[2]
			vn := inv[3]*0.5 + inv[4]*fy + inv[5]
			wn := inv[6]*0.5 + inv[7]*fy + inv[8]
			for x := 0; x < w; x++ {
				u, v := un/wn-0.5, vn/wn-0.5
				un += inv[0]
				vn += inv[3]
				wn += inv[6]
				p := row[4*x : 4*x+4]
				p[3] = 255
				if u >= 0 && v >= 0 && u < float64(sw-1) && v < float64(sh-1) {
					// Inside: fixed-point bilinear.
					ix, iy := int(u), int(v)
					fx, fy := uint32((u-float64(ix))*256), uint32((v-float64(iy))*256)
					o := iy*stride + ix*4
					s00, s10 := src.Pix[o:o+3], src.Pix[o+4:o+7]
					s01, s11 := src.Pix[o+stride:o+stride+3], src.Pix[o+stride+4:o+stride+7]
					for c := 0; c < 3; c++ {
						top := uint32(s00[c])*(256-fx) + uint32(s10[c])*fx
						bot := uint32(s01[c])*(256-fx) + uint32(s11[c])*fx
						p[c] = uint8((top*(256-fy) + bot*fy + 32768) >> 16)
					}
					continue
				}
				// At or beyond the page edge: neighbours outside the page
				// contribute the background.
				bilinearOrBg(p, src, u, v, bg, x, y)
			}
		}
	})
	return dst, nil
}

func clamp8(v float64) uint8 {
	if v <= 0 {
		return 0
	}
	if v >= 255 {
		return 255
	}
	return uint8(v + 0.5)
}

func cloneNRGBA(src *image.NRGBA) *image.NRGBA {
	b := src.Rect
	dst := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
	for y := 0; y < b.Dy(); y++ {
		copy(dst.Pix[y*dst.Stride:y*dst.Stride+4*b.Dx()], src.Pix[(y)*src.Stride:])
	}
	return dst
}

// opaqueRGBA views an opaque NRGBA image as RGBA (the same bytes when
// every alpha is 255), which the JPEG encoder reads quickly.
func opaqueRGBA(m *image.NRGBA) *image.RGBA {
	return &image.RGBA{Pix: m.Pix, Stride: m.Stride, Rect: m.Rect}
}

func toNRGBA(m image.Image) *image.NRGBA {
	if n, ok := m.(*image.NRGBA); ok && n.Rect.Min == (image.Point{}) {
		return n
	}
	if yc, ok := m.(*image.YCbCr); ok {
		b := yc.Rect
		dst := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
		parallelRows(b.Dy(), func(y0, y1 int) {
			for y := y0; y < y1; y++ {
				row := dst.Pix[y*dst.Stride:]
				for x := 0; x < b.Dx(); x++ {
					yi := yc.YOffset(b.Min.X+x, b.Min.Y+y)
					ci := yc.COffset(b.Min.X+x, b.Min.Y+y)
					r, g, bb := color.YCbCrToRGB(yc.Y[yi], yc.Cb[ci], yc.Cr[ci])
					row[4*x], row[4*x+1], row[4*x+2], row[4*x+3] = r, g, bb, 255
				}
			}
		})
		return dst
	}
	b := m.Bounds()
	dst := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
	draw.Draw(dst, dst.Rect, m, b.Min, draw.Src)
	return dst
}

func greyInPlace(img *image.NRGBA) {
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride : y*img.Stride+4*img.Rect.Dx()]
			for i := 0; i < len(row); i += 4 {
				// ITU-R BT.601 luma weights (common practice).
				l := (299*uint32(row[i]) + 587*uint32(row[i+1]) + 114*uint32(row[i+2]) + 500) / 1000
				row[i], row[i+1], row[i+2] = uint8(l), uint8(l), uint8(l)
			}
		}
	})
}

func fadeInPlace(img *image.NRGBA, f float64) {
	k := uint32(math.Round((1 - f) * 256))
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride : y*img.Stride+4*img.Rect.Dx()]
			for i := 0; i < len(row); i++ {
				if i&3 == 3 {
					continue
				}
				row[i] = uint8(255 - (255-uint32(row[i]))*k/256)
			}
		}
	})
}

// crease darkens a band along a random line with a bright edge on one
// side, like a fold flattened under glass.
func crease(img *image.NRGBA, rng *rand.Rand) {
	W, H := float64(img.Rect.Dx()), float64(img.Rect.Dy())
	var px, py, a float64
	if rng.Intn(2) == 0 { // roughly vertical fold
		px, py, a = W*(0.2+0.6*rng.Float64()), H/2, math.Pi/2+0.15*(rng.Float64()-0.5)
	} else {
		px, py, a = W/2, H*(0.2+0.6*rng.Float64()), 0.1*(rng.Float64()-0.5)
	}
	nx, ny := -math.Sin(a), math.Cos(a)
	width := math.Max(2, math.Min(W, H)*0.004*(0.5+rng.Float64()))
	depth := 0.1 + 0.15*rng.Float64()
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride:]
			for x := 0; x < img.Rect.Dx(); x++ {
				d := ((float64(x)+0.5-px)*nx + (float64(y)+0.5-py)*ny) / width
				if d < -4 || d > 4 {
					continue
				}
				// Dark core, lighter shoulder on the positive side.
				f := 1 - depth*math.Exp(-d*d) + 0.5*depth*math.Exp(-(d-1.5)*(d-1.5))*0.6
				p := row[4*x : 4*x+3]
				for c := range p {
					p[c] = clamp8(float64(p[c]) * f)
				}
			}
		}
	})
}

// unevenLight multiplies by a smooth field: a linear gradient in a
// random direction and a vignette, strength s.
func unevenLight(img *image.NRGBA, s float64, rng *rand.Rand) {
	W, H := float64(img.Rect.Dx()), float64(img.Rect.Dy())
	a := 2 * math.Pi * rng.Float64()
	gx, gy := math.Cos(a), math.Sin(a)
	cx, cy := W*(0.3+0.4*rng.Float64()), H*(0.3+0.4*rng.Float64())
	r2 := (W*W + H*H) / 4
	warm := rng.Float64() * 0.3 // a slightly warm cast under lamps
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride:]
			fy := float64(y) + 0.5
			for x := 0; x < img.Rect.Dx(); x++ {
				fx := float64(x) + 0.5
				g := ((fx/W-0.5)*gx + (fy/H-0.5)*gy) // −0.7..0.7
				v := ((fx-cx)*(fx-cx) + (fy-cy)*(fy-cy)) / r2
				f := 1 - s*(0.35*(g+0.7)+0.45*v)
				p := row[4*x : 4*x+3]
				p[0] = clamp8(float64(p[0]) * f)
				p[1] = clamp8(float64(p[1]) * f * (1 - 0.05*warm))
				p[2] = clamp8(float64(p[2]) * f * (1 - 0.15*warm))
			}
		}
	})
}

func speckle(img *image.NRGBA, frac float64, rng *rand.Rand) {
	W, H := img.Rect.Dx(), img.Rect.Dy()
	n := int(frac * float64(W*H))
	for i := 0; i < n; i++ {
		x, y := rng.Intn(W), rng.Intn(H)
		r := 1 + rng.Intn(2)
		v := uint8(rng.Intn(70))
		if rng.Intn(4) == 0 {
			v = 255 - uint8(rng.Intn(20)) // a white fleck
		}
		for yy := y; yy < min(H, y+r); yy++ {
			for xx := x; xx < min(W, x+r); xx++ {
				o := yy*img.Stride + xx*4
				img.Pix[o], img.Pix[o+1], img.Pix[o+2] = v, v, v
			}
		}
	}
}

func binarize(img *image.NRGBA, thr float64) {
	t := uint32(thr * 1000)
	parallelRows(img.Rect.Dy(), func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			row := img.Pix[y*img.Stride : y*img.Stride+4*img.Rect.Dx()]
			for i := 0; i < len(row); i += 4 {
				l := 299*uint32(row[i]) + 587*uint32(row[i+1]) + 114*uint32(row[i+2])
				v := uint8(255)
				if l < t {
					v = 0
				}
				row[i], row[i+1], row[i+2], row[i+3] = v, v, v, 255
			}
		}
	})
}

// gaussKernel returns integer weights (sum 1<<16) for sigma.
func gaussKernel(sigma float64) []int32 {
	if sigma <= 0.05 {
		return []int32{1 << 16}
	}
	r := int(math.Ceil(2.5 * sigma)) // the tails beyond 2.5σ hold 1.2 % of the weight
	w := make([]float64, 2*r+1)
	var s float64
	for i := range w {
		d := float64(i - r)
		w[i] = math.Exp(-d * d / (2 * sigma * sigma))
		s += w[i]
	}
	k := make([]int32, len(w))
	var tot int32
	for i := range w {
		k[i] = int32(math.Round(w[i] / s * 65536))
		tot += k[i]
	}
	k[r] += 65536 - tot
	return k
}

// gaussBlur blurs RGB with separate sigmas across and down.
func gaussBlur(src *image.NRGBA, sx, sy float64) *image.NRGBA {
	W, H := src.Rect.Dx(), src.Rect.Dy()
	kx, ky := gaussKernel(sx), gaussKernel(sy)
	rx, ry := len(kx)/2, len(ky)/2
	tmp := image.NewNRGBA(image.Rect(0, 0, W, H))
	parallelRows(H, func(y0, y1 int) {
		for y := y0; y < y1; y++ {
			in := src.Pix[y*src.Stride:]
			out := tmp.Pix[y*tmp.Stride:]
			for x := 0; x < W; x++ {
				var a0, a1, a2 int32
				if x >= rx && x+rx < W {
					seg := in[4*(x-rx) : 4*(x+rx)+3]
					for k, w := range kx {
						o := 4 * k
						a0 += w * int32(seg[o])
						a1 += w * int32(seg[o+1])
						a2 += w * int32(seg[o+2])
					}
				} else {
					for k, w := range kx {
						xx := min(max(x+k-rx, 0), W-1)
						o := 4 * xx
						a0 += w * int32(in[o])
						a1 += w * int32(in[o+1])
						a2 += w * int32(in[o+2])
					}
				}
				o := 4 * x
				out[o], out[o+1], out[o+2], out[o+3] = uint8((a0+32768)>>16), uint8((a1+32768)>>16), uint8((a2+32768)>>16), 255
			}
		}
	})
	dst := image.NewNRGBA(image.Rect(0, 0, W, H))
	parallelRows(H, func(y0, y1 int) {
		acc := make([]int32, 3*W)
		for y := y0; y < y1; y++ {
			clear(acc)
			for k, w := range ky {
				yy := min(max(y+k-ry, 0), H-1)
				in := tmp.Pix[yy*tmp.Stride:]
				for x := 0; x < W; x++ {
					acc[3*x] += w * int32(in[4*x])
					acc[3*x+1] += w * int32(in[4*x+1])
					acc[3*x+2] += w * int32(in[4*x+2])
				}
			}
			out := dst.Pix[y*dst.Stride:]
			for x := 0; x < W; x++ {
				out[4*x] = uint8((acc[3*x] + 32768) >> 16)
				out[4*x+1] = uint8((acc[3*x+1] + 32768) >> 16)
				out[4*x+2] = uint8((acc[3*x+2] + 32768) >> 16)
				out[4*x+3] = 255
			}
		}
	})
	return dst
}
