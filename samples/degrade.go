package samples

import (
	"bytes"
	"errors"
	"fmt"
	"image/color"
	"image/jpeg"
	"math"
	"math/rand"
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
