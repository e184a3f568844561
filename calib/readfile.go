package calib

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
)

// readBounded reads the regular file at path, at most max bytes: a file
// swapped for a FIFO or a device after Load looked at it, or one that grows
// while read, is refused instead of read without end.
func readBounded(path string, max int64) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("calib: %s: %w", path, err)
	}
	defer f.Close()
	fi, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("calib: %s: %w", path, err)
	}
	if !fi.Mode().IsRegular() {
		return nil, fmt.Errorf("calib: %s is not a regular file; give an image file saved on disk: %w", path, ErrFormat)
	}
	data, err := io.ReadAll(io.LimitReader(f, max+1))
	if err != nil {
		return nil, fmt.Errorf("calib: %s: %w", path, err)
	}
	if int64(len(data)) > max {
		return nil, fmt.Errorf("calib: %s is over the %d byte limit; scan at a lower resolution or raise the limit: %w", path, max, ErrTooBig)
	}
	return data, nil
}

// ErrEncrypted is wrapped by the error for a PDF that cannot be opened
// without a password: the file is whole, not damaged (not ErrFormat).
var ErrEncrypted = errors.New("calib: encrypted PDF")

// isEncrypted tells an encrypted PDF from a damaged one after poppler
// refused it: poppler says so ("Incorrect password"), or the file's
// trailer names an /Encrypt dictionary (PDF 32000-1:2008, 7.5.5 and 7.6.1).
func isEncrypted(data []byte, popplerErr string) bool {
	return strings.Contains(strings.ToLower(popplerErr), "password") || bytes.Contains(data, []byte("/Encrypt"))
}
