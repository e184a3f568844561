package batch

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"

	"tracelift/record/ledger"
)

// ErrOverlap: the output folder and the input folder overlap in a way that
// would let outputs replace inputs, or the batch read its own outputs, or
// skip inputs without a word.
var ErrOverlap = errors.New("batch: the output folder overlaps the input folder")

// CheckFolders refuses an output folder out that is the input folder src,
// holds it, or lies inside it while holding files a folder walk would
// read that tracelift did not write there (the walk skips the output
// folder, so they would be skipped silently, and the outputs could replace
// them). src may be a list file, which names its files one by one: then
// only the files' own protection applies (record/ledger).
func CheckFolders(src, out string) error {
	fi, err := os.Stat(src)
	if err != nil || !fi.IsDir() {
		return nil
	}
	in, o := resolved(src), resolved(out)
	switch {
	case in == o:
		return fmt.Errorf("%w: -o %s is the input folder; outputs could replace the images and the next run would read them: choose an output folder outside %s", ErrOverlap, out, src)
	case within(o, in):
		return fmt.Errorf("%w: the input folder %s lies inside the output folder %s; choose an output folder outside it", ErrOverlap, src, out)
	case !within(in, o):
		return nil
	}
	// out lies inside src.
	var found string
	filepath.WalkDir(o, func(p string, d fs.DirEntry, err error) error {
		if err != nil || found != "" {
			return fs.SkipAll
		}
		if d.IsDir() || strings.HasPrefix(d.Name(), ".") || !hasImageExt(d.Name()) {
			return nil
		}
		if !ledger.Ours(filepath.Dir(p), d.Name()) {
			found = p
			return fs.SkipAll
		}
		return nil
	})
	if found != "" {
		return fmt.Errorf("%w: the output folder %s lies inside the input folder %s and holds %s, which tracelift did not write: the batch would skip it and could replace it; choose an output folder outside %s", ErrOverlap, out, src, found, src)
	}
	return nil
}

// resolved returns p absolute with its links resolved, as far as it exists
// (a folder not made yet is joined to its nearest existing parent's real
// path).
func resolved(p string) string {
	a, err := filepath.Abs(p)
	if err != nil {
		return filepath.Clean(p)
	}
	rest := ""
	for {
		if r, err := filepath.EvalSymlinks(a); err == nil {
			return filepath.Join(r, rest)
		}
		parent := filepath.Dir(a)
		if parent == a {
			return filepath.Join(a, rest)
		}
		rest = filepath.Join(filepath.Base(a), rest)
		a = parent
	}
}
