package calib

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
)

// Document is an image file read once whose pages are decoded one at a
// time: a multi-page TIFF (a fax with its cover sheet), a PDF, or a
// single picture (one page).
type Document struct {
	Path   string
	Format string // png, jpeg, tiff, pdf
	Pages  int
	data   []byte
	opt    LoadOptions
	first  *Page // a single picture, decoded once to tell its format
}

// previewDPI renders a PDF page for Screen: 60 dpi gives about 700 px on an
// A4 page's long side, what the screen looks at.
const previewDPI = 60

// OpenDocument reads the file at path and counts its pages (a TIFF's page
// directories; a PDF's pages as poppler's pdfinfo reports them). Errors
// are those of Load.
func OpenDocument(path string, opt LoadOptions) (*Document, error) {
	data, err := readImageFile(path, opt)
	if err != nil {
		return nil, err
	}
	return NewDocument(data, path, opt)
}

// NewDocument is OpenDocument on bytes in memory.
func NewDocument(data []byte, name string, opt LoadOptions) (*Document, error) {
	if name == "" {
		name = "image"
	}
	d := &Document{Path: name, data: data, opt: opt, Pages: 1}
	switch {
	case bytes.HasPrefix(data, []byte("II*\x00")), bytes.HasPrefix(data, []byte("MM\x00*")):
		d.Format = "tiff"
		bo, _ := tiffOrder(data)
		offs, err := tiffPages(data, bo)
		if err != nil || len(offs) == 0 {
			return nil, fmt.Errorf("calib: %s: damaged TIFF (no readable page directory): %w", name, ErrFormat)
		}
		d.Pages = len(offs)
	case len(data) >= 8 && bytes.HasPrefix(bytes.TrimLeft(data[:min(len(data), 1024)], "\x00\t\r\n "), []byte("%PDF-")):
		d.Format = "pdf"
		n, err := pdfPageCount(data, name, opt)
		if err != nil {
			return nil, err
		}
		d.Pages = n
	default:
		// Decode tells what the file is, or why it is not an image.
		o := opt
		o.Page = 0
		pg, err := Decode(data, name, o)
		if err != nil {
			return nil, err
		}
		d.Format, d.first = pg.Format, pg
	}
	return d, nil
}

// Page decodes page i (0-based) at full resolution.
func (d *Document) Page(i int) (*Page, error) {
	if i == 0 && d.first != nil {
		pg := d.first
		d.first = nil // handed over: the caller may change it
		return pg, nil
	}
	o := d.opt
	o.Page = i
	return Decode(d.data, d.Path, o)
}

// Preview decodes page i for Screen: a PDF page rendered at low
// resolution (the raster is what costs), any other page as Page does.
func (d *Document) Preview(i int) (*Page, error) {
	if d.Format != "pdf" {
		return d.Page(i)
	}
	o := d.opt
	o.Page = i
	o.PDFDPI = previewDPI
	return Decode(d.data, d.Path, o)
}

// pdfPageCount asks poppler's pdfinfo how many pages the PDF holds.
func pdfPageCount(data []byte, name string, opt LoadOptions) (int, error) {
	if _, err := exec.LookPath("pdfinfo"); err != nil {
		return 0, fmt.Errorf("%w: %w", errNoPoppler, ErrFormat)
	}
	dir, err := os.MkdirTemp("", "tracelift-pdf-")
	if err != nil {
		return 0, fmt.Errorf("calib: %s: %w", name, err)
	}
	defer os.RemoveAll(dir)
	in := filepath.Join(dir, "in.pdf")
	if err := os.WriteFile(in, data, 0o600); err != nil {
		return 0, fmt.Errorf("calib: %s: %w", name, err)
	}
	parent := opt.Context
	if parent == nil {
		parent = context.Background()
	}
	ctx, cancel := context.WithTimeout(parent, pdfTimeout)
	defer cancel()
	cmd := exec.CommandContext(ctx, "pdfinfo", in)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	dieWithUs(cmd)
	out, err := cmd.Output()
	if err != nil {
		if parent.Err() != nil {
			return 0, fmt.Errorf("calib: %s: stopped: %w", name, parent.Err())
		}
		if isEncrypted(data, stderr.String()) {
			return 0, fmt.Errorf("calib: %s is an encrypted (password-protected) PDF; save or print the page again without a password, or export it as PNG: %w", name, ErrEncrypted)
		}
		return 0, fmt.Errorf("calib: %s: damaged PDF (pdfinfo: %v): %w", name, err, ErrFormat)
	}
	n, _, _ := parsePDFInfo(out, 1)
	if n < 1 {
		return 0, fmt.Errorf("calib: %s: the PDF names no page (pdfinfo says %q): %w", name, strconv.Quote(string(bytes.TrimSpace(out))), ErrFormat)
	}
	return n, nil
}
