package pipeline

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"tracelift/axis"
	"tracelift/record"
	"tracelift/record/csvio"
	"tracelift/record/edf"
	"tracelift/record/wfdb"
)

// Tracing is one ECG read from any file tracelift takes: a picture
// digitized through Process, a record file (WFDB, CSV, EDF+) read as it
// is, or a JSON written by digitize taken with the CSV beside it. It is
// what the comparison of two tracings (package compare) starts from; the
// command line and the desktop app read both sides through ReadTracing.
type Tracing struct {
	Label  string // the file's base name
	Record *record.Record
	// Findings of a picture as the pipeline measured it; nil for a record
	// file or a JSON (the comparison measures them).
	Findings *axis.Findings
	// Quality is the per-lead tracing confidence in 0..1 of a picture or
	// a JSON's reading; nil for a record file.
	Quality map[string]float64
	// Digitized is true when Record was traced from a picture.
	Digitized bool
	// Outcome is the pipeline's whole outcome for a picture; nil
	// otherwise.
	Outcome *Outcome
}

// ErrNotTracing is wrapped by ReadTracing's error for a file of a kind it
// does not read (a text file, a spreadsheet of another layout).
var ErrNotTracing = errors.New("pipeline: not a tracing file")

// IsPicture reports whether path names a picture by its extension (PNG,
// JPEG, TIFF, PDF): one that ReadTracing digitizes.
func IsPicture(path string) bool {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".png", ".jpg", ".jpeg", ".tif", ".tiff", ".pdf":
		return true
	}
	return false
}

// ReadTracing reads one tracing: a picture is digitized with opt, a record
// file read, our JSON taken with the CSV written beside it (its findings
// are then measured again from the signals with the JSON's per-lead
// confidence). A file of another kind gives an error wrapping
// ErrNotTracing.
func ReadTracing(ctx context.Context, path string, opt Options) (*Tracing, error) {
	t := &Tracing{Label: filepath.Base(path)}
	if _, err := os.Stat(path); err != nil && !(filepath.Ext(path) == "" && exists(path+".hea")) {
		return nil, fmt.Errorf("cannot read it: %w", err)
	}
	switch ext := strings.ToLower(filepath.Ext(path)); {
	case IsPicture(path):
		o, err := Process(ctx, path, opt)
		if err != nil {
			return nil, err
		}
		if o.Digitized == nil || o.Digitized.Record == nil {
			return nil, fmt.Errorf("nothing could be traced")
		}
		t.Record, t.Findings, t.Digitized, t.Outcome = o.Digitized.Record, o.Findings, true, o
		t.Quality = map[string]float64{}
		for l, q := range o.Digitized.Quality {
			t.Quality[l] = q.Confidence
		}
		return t, nil
	case ext == ".edf":
		f, err := os.Open(path)
		if err != nil {
			return nil, err
		}
		defer f.Close()
		rec, _, err := edf.Read(f)
		if err != nil {
			return nil, err
		}
		t.Record = rec
		return t, nil
	case ext == ".json":
		return jsonTracing(path, t)
	}
	rec, err := ReadRecordFile(path)
	if errors.Is(err, ErrNotTracing) {
		return nil, fmt.Errorf("%w, a picture (PNG, JPEG, TIFF, PDF), an EDF+ file or a JSON written by digitize", err)
	}
	if err != nil {
		return nil, err
	}
	t.Record = rec
	return t, nil
}

// jsonTracing reads a JSON written by digitize and the CSV of signals
// beside it (same stem).
func jsonTracing(path string, t *Tracing) (*Tracing, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var doc struct {
		File    string `json:"file"`
		Quality map[string]struct {
			Confidence float64 `json:"confidence"`
		} `json:"quality"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		return nil, notTracing{fmt.Sprintf("not a JSON file this command reads (%v)", err)}
	}
	csv := strings.TrimSuffix(path, filepath.Ext(path)) + ".csv"
	if !exists(csv) {
		return nil, fmt.Errorf("the signals are not in the JSON: put the CSV digitize wrote (%s) beside it, or give that CSV", filepath.Base(csv))
	}
	rec, err := ReadRecordFile(csv)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", csv, err)
	}
	t.Record = rec
	if len(doc.Quality) > 0 {
		t.Digitized = true
		t.Quality = map[string]float64{}
		for l, q := range doc.Quality {
			t.Quality[record.CanonicalLead(l)] = q.Confidence
		}
	}
	return t, nil
}

// ReadRecordFile opens a WFDB header (".hea", or a path without extension
// whose .hea exists) or a CSV file. Another kind of file gives an error
// wrapping ErrNotTracing.
func ReadRecordFile(path string) (*record.Record, error) {
	ext := strings.ToLower(filepath.Ext(path))
	switch ext {
	case ".csv", ".txt":
		f, err := openRegular(path)
		if err != nil {
			return nil, err
		}
		defer f.Close()
		rec, err := csvio.Read(f)
		if err != nil {
			return nil, err
		}
		if rec.Name == "" {
			rec.Name = strings.TrimSuffix(filepath.Base(path), filepath.Ext(path))
		}
		return rec, nil
	case ".hea":
		return wfdb.ReadRecord(path)
	case "":
		if _, err := os.Stat(path + ".hea"); err == nil {
			return wfdb.ReadRecord(path)
		}
	}
	return nil, notTracing{"not a record this command reads (give a WFDB .hea header or a .csv file)"}
}

// notTracing is the error for a file of a kind not read; it is
// ErrNotTracing to errors.Is.
type notTracing struct{ msg string }

func (e notTracing) Error() string      { return e.msg }
func (notTracing) Is(target error) bool { return target == ErrNotTracing }

// openRegular opens path only when it is a regular file (a link to one is
// followed): a FIFO would block, a device such as /dev/zero never ends.
func openRegular(path string) (*os.File, error) {
	fi, err := os.Stat(path)
	if err != nil {
		return nil, err
	}
	if !fi.Mode().IsRegular() {
		return nil, fmt.Errorf("%s is not a regular file (%v); give a record file saved on disk", path, fi.Mode().Type())
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	if fi, err := f.Stat(); err != nil || !fi.Mode().IsRegular() {
		f.Close()
		return nil, fmt.Errorf("%s is not a regular file; give a record file saved on disk", path)
	}
	return f, nil
}

func exists(p string) bool {
	_, err := os.Stat(p)
	return err == nil
}
