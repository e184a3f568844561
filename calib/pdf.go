package calib

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"image/png"
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
	pdfDPI     = 300
	pdfTimeout = 60 * time.Second
)

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
	dpi := pdfDPI
	wpx, hpx := int(wpt/72*float64(dpi)+1), int(hpt/72*float64(dpi)+1)
	if err := checkSize(name, wpx, hpx, opt); err != nil {
		return err
	}
	out := filepath.Join(dir, "page")
	cmd := exec.CommandContext(ctx, "pdftoppm", "-png", "-r", strconv.Itoa(dpi), "-f", strconv.Itoa(n), "-l", strconv.Itoa(n), "-singlefile", in, out)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	dieWithUs(cmd)
	if err := cmd.Run(); err != nil {
		if parent.Err() != nil {
			return fmt.Errorf("calib: %s: stopped: %w", name, parent.Err())
		}
		return fmt.Errorf("calib: %s page %d: pdftoppm failed (%v %s): %w", name, n, err, strings.TrimSpace(stderr.String()), ErrFormat)
	}
	f, err := os.Open(out + ".png")
	if err != nil {
		return fmt.Errorf("calib: %s page %d: no raster produced: %w", name, n, ErrFormat)
	}
	defer f.Close()
	img, err := png.Decode(bufio.NewReader(f))
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
