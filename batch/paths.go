package batch

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"sort"
	"strings"

	"tracelift/record/ledger"
)

// outDir returns the folder below root (an absolute path with no symbolic
// links) that mirrors rel's folder, creating it one component at a time and
// refusing to pass through a symbolic link or to leave root.
func outDir(root, rel string) (string, error) {
	if rel == "" || path.IsAbs(rel) || filepath.IsAbs(rel) {
		return "", fmt.Errorf("batch: %q is not a relative path", rel)
	}
	dir := root
	parts := strings.Split(path.Dir(path.Clean(rel)), "/")
	for _, c := range parts {
		if c == "." || c == "" {
			continue
		}
		if c == ".." {
			return "", fmt.Errorf("batch: %q climbs out of the output folder; outputs stay inside it", rel)
		}
		dir = filepath.Join(dir, cleanComponent(c))
		fi, err := os.Lstat(dir)
		switch {
		case errors.Is(err, fs.ErrNotExist):
			if err := os.Mkdir(dir, 0o755); err != nil && !errors.Is(err, fs.ErrExist) {
				return "", fmt.Errorf("batch: %w", err)
			}
			// Another worker may have made it meanwhile: check again.
			if fi, err = os.Lstat(dir); err != nil {
				return "", fmt.Errorf("batch: %w", err)
			}
		case err != nil:
			return "", fmt.Errorf("batch: %w", err)
		}
		if fi.Mode()&fs.ModeSymlink != 0 {
			return "", fmt.Errorf("batch: %s is a symbolic link; outputs are never written through a link: remove it or choose another -o folder", dir)
		}
		if !fi.IsDir() {
			return "", fmt.Errorf("batch: %s is a file where the output folder should be; move it away", dir)
		}
	}
	if !within(root, dir) {
		return "", fmt.Errorf("batch: %q maps outside the output folder", rel)
	}
	return dir, nil
}

// within reports whether p is root or below it (both clean, absolute).
func within(root, p string) bool {
	r, err := filepath.Rel(root, p)
	return err == nil && r != ".." && !strings.HasPrefix(r, ".."+string(filepath.Separator)) && !filepath.IsAbs(r)
}

// refuseLink fails when path exists as a symbolic link (renaming over it
// would be harmless, but a link there means someone meant to redirect the
// outputs, and reading through it would not).
func refuseLink(p string) error {
	fi, err := os.Lstat(p)
	if err == nil && fi.Mode()&fs.ModeSymlink != 0 {
		return fmt.Errorf("batch: %s is a symbolic link; outputs are never written through a link: remove it", p)
	}
	return nil
}

// placeOutputs moves every file from the scratch folder into dir with
// rename(2), the ".json" document last, so a reader that finds the document
// finds the rest. It returns the final paths.
//
// Before anything moves, the names are claimed in dir's ledger for src: a
// file tracelift did not write there, or wrote for another page, or the
// input itself, is never replaced (record/ledger).
func placeOutputs(scratch, dir string, src ledger.Source, input string) ([]string, error) {
	ents, err := os.ReadDir(scratch)
	if err != nil {
		return nil, fmt.Errorf("batch: %w", err)
	}
	var names []string
	for _, e := range ents {
		if e.Type().IsRegular() && !strings.HasPrefix(e.Name(), ".") {
			names = append(names, e.Name())
		}
	}
	sort.SliceStable(names, func(a, b int) bool {
		return !strings.HasSuffix(names[a], ".json") && strings.HasSuffix(names[b], ".json")
	})
	for _, n := range names {
		dst := filepath.Join(dir, n)
		if err := refuseLink(dst); err != nil {
			return nil, err
		}
		if fi, err := os.Lstat(dst); err == nil && fi.IsDir() {
			return nil, fmt.Errorf("batch: %s is a folder where an output file should go; move it away", dst)
		}
	}
	if err := ledger.Claim(dir, src, names, []string{input}); err != nil {
		return nil, fmt.Errorf("batch: %w", err)
	}
	var out []string
	for _, n := range names {
		dst := filepath.Join(dir, n)
		if err := os.Rename(filepath.Join(scratch, n), dst); err != nil {
			return out, fmt.Errorf("batch: %w", err)
		}
		out = append(out, dst)
	}
	if d, err := os.Open(dir); err == nil {
		d.Sync()
		d.Close()
	}
	return out, nil
}
