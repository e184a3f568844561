package calib

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"image"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"time"
)

// PDF pages are rasterised by poppler's pdftoppm and sized first with
// pdfinfo (both in Debian's poppler-utils), each under a time limit.

const (
	pdfDPI     = 300 // plenty for 1 mm lines (11.8 px/mm)
	pdfLongPx  = 4200
	pdfMinDPI  = 100
	pdfTimeout = 60 * time.Second
)

// pdfResolution chooses the rendering resolution from the page's size in
// points: 300 dpi, lowered for a page larger than A3-ish so that its long
// side stays near pdfLongPx pixels (a grid needs about 4 px per mm, which
// 100 dpi still gives).
func pdfResolution(wpt, hpt float64) int {
	long := math.Max(wpt, hpt) / 72 // inches
	if long <= 0 {
		return pdfDPI
	}
	dpi := int(pdfLongPx / long)
	return max(pdfMinDPI, min(pdfDPI, dpi))
}

// decodePPM reads the binary netpbm raster pdftoppm writes: P6 (RGB) or
// P5 (grey), maxval 255 (Netpbm's format description). Bounded: the
// declared size must match the bytes and the pixel budget.
func decodePPM(b []byte, opt LoadOptions) (image.Image, error) {
	if len(b) < 2 || b[0] != 'P' || (b[1] != '6' && b[1] != '5') {
		return nil, errors.New("not a binary netpbm raster")
	}
	p := 2
	var vals [3]int
	for k := 0; k < 3; k++ {
		for p < len(b) && (b[p] == ' ' || b[p] == '\n' || b[p] == '\r' || b[p] == '\t' || b[p] == '#') {
			if b[p] == '#' {
				for p < len(b) && b[p] != '\n' {
					p++
				}
				continue
			}
			p++
		}
		v, start := 0, p
		for p < len(b) && b[p] >= '0' && b[p] <= '9' && p-start < 9 {
			v = v*10 + int(b[p]-'0')
			p++
		}
		if p == start {
			return nil, errors.New("damaged netpbm header")
		}
		vals[k] = v
	}
	if p >= len(b) {
		return nil, errors.New("netpbm raster cut short")
	}
	p++ // the single whitespace before the pixels
	w, h, maxval := vals[0], vals[1], vals[2]
	if w <= 0 || h <= 0 || maxval != 255 {
		return nil, fmt.Errorf("netpbm raster %d×%d, maxval %d: not supported", w, h, maxval)
	}
	if int64(w)*int64(h) > opt.maxPixels() {
		return nil, fmt.Errorf("raster of %d×%d pixels over the budget: %w", w, h, ErrTooBig)
	}
	ch := 3
	if b[1] == '5' {
		ch = 1
	}
	if int64(len(b)-p) < int64(w)*int64(h)*int64(ch) {
		return nil, errors.New("netpbm raster cut short")
	}
	px := b[p:]
	if ch == 1 {
		g := image.NewGray(image.Rect(0, 0, w, h))
		copy(g.Pix, px[:w*h])
		return g, nil
	}
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	for i, j := 0, 0; i < w*h; i, j = i+1, j+3 {
		img.Pix[4*i], img.Pix[4*i+1], img.Pix[4*i+2], img.Pix[4*i+3] = px[j], px[j+1], px[j+2], 255
	}
	return img, nil
}

var errNoPoppler = errors.New("calib: reading PDF needs poppler-utils (pdftoppm, pdfinfo); install it (apt-get install poppler-utils) or export the page as PNG")

func decodePDF(data []byte, name string, opt LoadOptions, pg *Page) error {
	if _, err := exec.LookPath("pdftoppm"); err != nil {
		return fmt.Errorf("%w: %w", errNoPoppler, ErrFormat)
	}
	if _, err := exec.LookPath("pdfinfo"); err != nil {
		return fmt.Errorf("%w: %w", errNoPoppler, ErrFormat)
	}
	dir, err := os.MkdirTemp("", "tracelift-pdf-")
	if err != nil {
		return fmt.Errorf("calib: %s: %w", name, err)
	}
	defer os.RemoveAll(dir)
	in := filepath.Join(dir, "in.pdf")
	if err := os.WriteFile(in, data, 0o600); err != nil {
		return fmt.Errorf("calib: %s: %w", name, err)
	}
	parent := opt.Context
	if parent == nil {
		parent = context.Background()
	}
	ctx, cancel := context.WithTimeout(parent, pdfTimeout)
	defer cancel()
	n := opt.Page + 1
	infoCmd := exec.CommandContext(ctx, "pdfinfo", "-f", strconv.Itoa(n), "-l", strconv.Itoa(n), in)
	var infoErr bytes.Buffer
	infoCmd.Stderr = &infoErr
	dieWithUs(infoCmd)
	info, err := infoCmd.Output()
	if err != nil {
		if parent.Err() != nil {
			return fmt.Errorf("calib: %s: stopped: %w", name, parent.Err())
		}
		if isEncrypted(data, infoErr.String()) {
			return fmt.Errorf("calib: %s is an encrypted (password-protected) PDF; save or print the page again without a password, or export it as PNG: %w", name, ErrEncrypted)
		}
		return fmt.Errorf("calib: %s: damaged PDF or page %d missing (pdfinfo: %v): %w", name, n, err, ErrFormat)
	}
	pages, wpt, hpt := parsePDFInfo(info, n)
	pg.PageCount = pages
	pg.PageIndex = opt.Page
	if pages > 0 && opt.Page >= pages {
		return fmt.Errorf("calib: %s has %d page(s); page %d does not exist (pages count from 1): %w", name, pages, n, ErrFormat)
	}
	if wpt <= 0 || hpt <= 0 {
		return fmt.Errorf("calib: %s: cannot read the size of page %d: %w", name, n, ErrFormat)
	}
	dpi := opt.PDFDPI
	if dpi <= 0 {
		dpi = pdfResolution(wpt, hpt)
	}
	wpx, hpx := int(wpt/72*float64(dpi)+1), int(hpt/72*float64(dpi)+1)
	if err := checkSize(name, wpx, hpx, 4, opt); err != nil {
		return err
	}
	out := filepath.Join(dir, "page")
	// Netpbm output (PPM), not PNG: pdftoppm's PNG compression of a
	// 300 dpi A4 page took 8 of the 8.3 s it spent (0.2 s as PPM).
	cmd := exec.CommandContext(ctx, "pdftoppm", "-r", strconv.Itoa(dpi), "-f", strconv.Itoa(n), "-l", strconv.Itoa(n), "-singlefile", in, out)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	dieWithUs(cmd)
	if err := cmd.Run(); err != nil {
		if parent.Err() != nil {
			return fmt.Errorf("calib: %s: stopped: %w", name, parent.Err())
		}
		return fmt.Errorf("calib: %s page %d: pdftoppm failed (%v %s): %w", name, n, err, strings.TrimSpace(stderr.String()), ErrFormat)
	}
	raster, err := os.ReadFile(out + ".ppm")
	if err != nil {
		return fmt.Errorf("calib: %s page %d: no raster produced: %w", name, n, ErrFormat)
	}
	img, err := decodePPM(raster, opt)
	if err != nil {
		return fmt.Errorf("calib: %s page %d: %v: %w", name, n, err, ErrFormat)
	}
	pg.Image = img
	pg.DPIX, pg.DPIY = float64(dpi), float64(dpi)
	return nil
}

// parsePDFInfo reads "Pages:" and "Page    N size: W x H pts" (or "Page
// size:" for single-page output) from pdfinfo's text.
func parsePDFInfo(info []byte, n int) (pages int, w, h float64) {
	for _, line := range strings.Split(string(info), "\n") {
		f := strings.Fields(line)
		if len(f) >= 2 && f[0] == "Pages:" {
			pages, _ = strconv.Atoi(f[1])
		}
		if strings.HasPrefix(line, "Page") && strings.Contains(line, "size:") {
			i := strings.Index(line, "size:")
			g := strings.Fields(line[i+5:])
			if len(g) >= 3 && g[1] == "x" {
				ww, e1 := strconv.ParseFloat(g[0], 64)
				hh, e2 := strconv.ParseFloat(g[2], 64)
				if e1 == nil && e2 == nil && ww > 0 && hh > 0 && ww < 1e6 && hh < 1e6 {
					w, h = ww, hh
				}
			}
		}
	}
	_ = n
	return
}
