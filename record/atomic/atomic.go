// Package atomic writes files so that a reader (or a crash) only ever sees
// the old content or the whole new content, never a partial file.
//
// The method is the usual one on POSIX file systems (common practice): the
// new content goes to a temporary file in the same directory, the file is
// flushed to stable storage with fsync, renamed over the target (rename is
// atomic within one file system, POSIX rename(2)), and the directory is
// fsynced so the rename itself survives a power loss.
package atomic

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// WriteFile writes the file at path with the content produced by write.
// The file gets permissions perm (before the umask; an existing file's
// permissions are not kept). On any error — from write, the disk, or the
// rename — the temporary file is removed and the old file at path, if any,
// is left untouched.
func WriteFile(path string, write func(w io.Writer) error, perm os.FileMode) (err error) {
	if write == nil {
		return errors.New("atomic: nil write function")
	}
	dir, base := filepath.Split(path)
	if base == "" {
		return fmt.Errorf("atomic: %q names a directory, not a file", path)
	}
	if dir == "" {
		dir = "."
	}
	tmp, err := os.CreateTemp(dir, "."+base+".tmp-*")
	if err != nil {
		return fmt.Errorf("atomic: %w", err)
	}
	tmpName := tmp.Name()
	closed := false
	defer func() {
		if err != nil {
			if !closed {
				tmp.Close()
			}
			os.Remove(tmpName)
		}
	}()
	if err = write(tmp); err != nil {
		return fmt.Errorf("atomic: writing %s: %w", path, err)
	}
	if err = tmp.Chmod(perm); err != nil {
		return fmt.Errorf("atomic: %w", err)
	}
	if err = tmp.Sync(); err != nil {
		return fmt.Errorf("atomic: flushing %s: %w", path, err)
	}
	closed = true
	if err = tmp.Close(); err != nil {
		return fmt.Errorf("atomic: closing %s: %w", path, err)
	}
	if err = os.Rename(tmpName, path); err != nil {
		return fmt.Errorf("atomic: %w", err)
	}
	// The new content is in place; a failing directory sync is reported but
	// the temporary file is gone (renamed), so nothing is left to remove.
	if d, derr := os.Open(dir); derr == nil {
		serr := d.Sync()
		d.Close()
		if serr != nil {
			return fmt.Errorf("atomic: flushing directory %s: %w", dir, serr)
		}
	}
	return nil
}
