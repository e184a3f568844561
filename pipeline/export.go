package pipeline

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"tracelift/record"
	"tracelift/record/atomic"
	"tracelift/record/csvio"
	"tracelift/record/edf"
	"tracelift/record/wfdb"
)

// The export formats.
const (
	FormatCSV  = "csv"
	FormatWFDB = "wfdb"
	FormatEDF  = "edf"
	FormatJSON = "json"
	FormatPDF  = "pdf"
)

var allFormats = []string{FormatCSV, FormatWFDB, FormatEDF, FormatJSON, FormatPDF}

// ParseFormats splits a comma-separated format list ("csv,json,pdf"),
// rejecting unknown names. "all" selects every format.
func ParseFormats(s string) ([]string, error) {
	var out []string
	seen := map[string]bool{}
	for _, f := range strings.Split(s, ",") {
		f = strings.ToLower(strings.TrimSpace(f))
		if f == "" {
			continue
		}
		if f == "all" {
			return append([]string(nil), allFormats...), nil
		}
		ok := false
		for _, a := range allFormats {
			ok = ok || a == f
		}
		if !ok {
			return nil, fmt.Errorf("unknown export format %q (choose from %s)", f, strings.Join(allFormats, ", "))
		}
		if !seen[f] {
			seen[f] = true
			out = append(out, f)
		}
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("no export format given (choose from %s)", strings.Join(allFormats, ", "))
	}
	return out, nil
}

// Stem returns the file name of path without directory and extension.
func Stem(path string) string {
	b := filepath.Base(path)
	return strings.TrimSuffix(b, filepath.Ext(b))
}

// ExportOptions tune the writers.
type ExportOptions struct {
	RateHz float64 // CSV row rate; 0 = 500
	Paper  string  // "a4" (default) or "letter" for the PDF
	// Header fields the user fills in for the printed summary; they stay
	// on this machine.
	Header map[string]string
	// Inputs are files this run read besides the page's own image (which
	// is always protected); no output ever replaces one of them.
	Inputs []string
	// PDF renders the printable summary (report.Write); the caller passes
	// it so that this package does not depend on the PDF library. Without
	// it the "pdf" format fails with ErrNoPDFWriter.
	PDF PDFWriter
}

// PDFWriter renders the printable summary of an outcome.
type PDFWriter func(w io.Writer, o *Outcome, opt ExportOptions) error

// ErrNoPDFWriter is returned for the "pdf" format when ExportOptions.PDF
// is nil.
var ErrNoPDFWriter = errors.New("pipeline: no PDF writer was given")

// Export writes the chosen formats for o into dir as <stem>.<ext>, each
// file atomically. It returns the paths written.
func Export(o *Outcome, dir, stem string, formats []string, opt ExportOptions) ([]string, error) {
	if o == nil || o.Digitized == nil || o.Digitized.Record == nil {
		return nil, fmt.Errorf("export: nothing was digitized")
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("export: %w", err)
	}
	if opt.RateHz == 0 {
		opt.RateHz = 500
	}
	if err := claimOutputs(o, dir, stem, formats, opt); err != nil {
		return nil, fmt.Errorf("export: %w", err)
	}
	rec := o.Digitized.Record
	var files []string
	for _, f := range formats {
		var err error
		path := filepath.Join(dir, stem+"."+f)
		switch f {
		case FormatCSV:
			err = atomic.WriteFile(path, func(w io.Writer) error { return csvio.Write(w, rec, opt.RateHz) }, 0o644)
		case FormatJSON:
			var b []byte
			b, err = json.Marshal(o)
			if err == nil {
				var buf bytes.Buffer
				if err = json.Indent(&buf, b, "", "  "); err == nil {
					buf.WriteByte('\n')
					err = atomic.WriteFile(path, func(w io.Writer) error { _, e := w.Write(buf.Bytes()); return e }, 0o644)
				}
			}
		case FormatWFDB:
			path = filepath.Join(dir, stem+".hea")
			err = wfdb.WriteRecord(dir, stem, uniformRecord(rec, opt.RateHz))
			if anns := beatAnnotations(o); err == nil && len(anns) > 0 {
				atr := filepath.Join(dir, stem+".atr")
				err = wfdb.WriteAnnotations(atr, wfdb.FromRecord(anns, opt.RateHz, 0))
				files = append(files, atr)
			}
		case FormatEDF:
			ur := uniformRecord(rec, opt.RateHz)
			ur.Annotations = append(beatAnnotations(o), rec.Annotations...)
			err = edf.WriteFile(path, ur, edf.Options{})
		case FormatPDF:
			if opt.PDF == nil {
				err = ErrNoPDFWriter
			} else {
				err = atomic.WriteFile(path, func(w io.Writer) error { return opt.PDF(w, o, opt) }, 0o644)
			}
		default:
			err = fmt.Errorf("unknown format %q", f)
		}
		if err != nil {
			return files, fmt.Errorf("export %s: %w", f, err)
		}
		files = append(files, path)
	}
	return files, nil
}

// uniformRecord puts every lead on one clock from time 0 at rate hz, NaN
// outside each lead's window, so formats with one length per record (WFDB,
// EDF+) hold the whole tracing. Standard leads come first in their order.
func uniformRecord(rec *record.Record, hz float64) *record.Record {
	dur := 0.0
	for i := range rec.Signals {
		dur = math.Max(dur, rec.Signals[i].EndS())
	}
	n := int(math.Round(dur * hz))
	out := &record.Record{Name: rec.Name, Provenance: rec.Provenance, Corrections: rec.Corrections}
	for _, s := range orderedSignals(rec) {
		r := s.Resample(hz)
		mv := make([]float64, n)
		for i := range mv {
			mv[i] = math.NaN()
		}
		off := int(math.Round(r.StartS * hz))
		for i, v := range r.MV {
			if j := off + i; j >= 0 && j < n {
				mv[j] = v
			}
		}
		out.Signals = append(out.Signals, record.Signal{Lead: s.Lead, RateHz: hz, MV: mv})
	}
	return out
}

func orderedSignals(rec *record.Record) []*record.Signal {
	var out []*record.Signal
	for _, l := range record.Standard12 {
		if s := rec.Lead(l); s != nil {
			out = append(out, s)
		}
	}
	var rest []*record.Signal
	for i := range rec.Signals {
		if !record.IsStandard(rec.Signals[i].Lead) {
			rest = append(rest, &rec.Signals[i])
		}
	}
	sort.SliceStable(rest, func(a, b int) bool { return rest[a].Lead < rest[b].Lead })
	return append(out, rest...)
}
