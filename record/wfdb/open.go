package wfdb

import (
	"fmt"
	"os"
)

// openRegular opens path for reading only when it is a regular file (a
// link to one is followed): a FIFO would block the reader, a device such as
// /dev/zero would never end.
func openRegular(path string) (*os.File, error) {
	fi, err := os.Stat(path)
	if err != nil {
		return nil, err
	}
	if !fi.Mode().IsRegular() {
		return nil, fmt.Errorf("wfdb: %s is not a regular file (%v); give the record's own files", path, fi.Mode().Type())
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	// It may have been swapped between the two looks.
	if fi, err := f.Stat(); err != nil || !fi.Mode().IsRegular() {
		f.Close()
		return nil, fmt.Errorf("wfdb: %s is not a regular file; give the record's own files", path)
	}
	return f, nil
}
