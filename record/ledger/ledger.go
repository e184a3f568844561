// Package ledger keeps, in each output folder, the list of files tracelift
// wrote there and for which source, so that nothing tracelift writes ever
// replaces a file it did not write: a destination that exists is replaced
// only when the folder's ledger names it as written for the same source
// (the same page of the same input file, a newer run of it).
//
// The ledger is the hidden file ".tracelift-written" in the folder, one JSON
// object per line, appended with O_APPEND (a line of a few hundred bytes is
// written whole by one write(2), so processes sharing the folder, such as
// the shards of a batch, do not tear each other's lines); the last line for
// a name wins. A line cut short by a crash is skipped.
package ledger

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"sync"
)

// Name is the ledger's file name inside an output folder.
const Name = ".tracelift-written"

// Errors a Claim unwraps to.
var (
	// ErrInput: the destination is one of the run's inputs (the same file,
	// also through a link or a second hard link).
	ErrInput = errors.New("ledger: the output would replace an input of this run")
	// ErrNotOurs: the destination exists and tracelift did not write it.
	ErrNotOurs = errors.New("ledger: a file tracelift did not write is in the way")
	// ErrOtherSource: tracelift wrote the destination, but for another source.
	ErrOtherSource = errors.New("ledger: the file was written for another source")
)

// Source names what an output was made from: the real path of the input
// file (links resolved) and, for a multi-page file, the page (1-based; 0
// when it does not apply). Tool-level files (a batch summary) use a Path
// such as "batch summary".
type Source struct {
	Path string `json:"source"`
	Page int    `json:"page,omitempty"`
}

func (s Source) String() string {
	if s.Page > 0 {
		return fmt.Sprintf("%s (page %d)", s.Path, s.Page)
	}
	return s.Path
}

// FileSource returns the Source of an input file: its absolute path with
// symbolic links resolved (the path as given when it cannot be resolved).
func FileSource(path string, page int) Source {
	return Source{Path: RealPath(path), Page: page}
}

// RealPath returns path made absolute with its links resolved, or as clean
// as it can be made when it does not exist.
func RealPath(path string) string {
	p, err := filepath.Abs(path)
	if err != nil {
		return filepath.Clean(path)
	}
	if r, err := filepath.EvalSymlinks(p); err == nil {
		return r
	}
	return p
}

// ConflictError says which destination may not be written, and why. It
// unwraps to ErrInput, ErrNotOurs or ErrOtherSource.
type ConflictError struct {
	Path  string // the destination
	Owner Source // for ErrOtherSource: what it was written for
	Kind  error
}

func (e *ConflictError) Error() string {
	switch e.Kind {
	case ErrInput:
		return fmt.Sprintf("%s is an input of this run and would be replaced by an output; choose another -o folder", e.Path)
	case ErrOtherSource:
		return fmt.Sprintf("%s was written for %s, not for this input; choose another -o folder, or remove it first if it may go", e.Path, e.Owner)
	default:
		return fmt.Sprintf("%s exists and was not written by tracelift; it is never replaced: choose another -o folder, or move it away", e.Path)
	}
}

func (e *ConflictError) Unwrap() error { return e.Kind }

type entry struct {
	Name string `json:"name"`
	Source
}

// book is the in-memory copy of one folder's ledger, read on from where it
// was left (other processes may have appended since).
type book struct {
	off    int64
	owners map[string]Source
}

var (
	mu    sync.Mutex
	books = map[string]*book{}
)

// refresh reads what was appended to dir's ledger since the last call.
// The caller holds mu.
func refresh(dir string) (*book, error) {
	b := books[dir]
	if b == nil {
		b = &book{owners: map[string]Source{}}
		books[dir] = b
	}
	p := filepath.Join(dir, Name)
	fi, err := os.Lstat(p)
	if errors.Is(err, fs.ErrNotExist) {
		b.off, b.owners = 0, map[string]Source{}
		return b, nil
	}
	if err != nil {
		return nil, fmt.Errorf("ledger: %w", err)
	}
	if !fi.Mode().IsRegular() {
		return nil, fmt.Errorf("ledger: %s is not a regular file; remove it", p)
	}
	if fi.Size() < b.off { // replaced or cut: read it again from the start
		b.off, b.owners = 0, map[string]Source{}
	}
	if fi.Size() == b.off {
		return b, nil
	}
	f, err := os.Open(p)
	if err != nil {
		return nil, fmt.Errorf("ledger: %w", err)
	}
	defer f.Close()
	if _, err := f.Seek(b.off, io.SeekStart); err != nil {
		return nil, fmt.Errorf("ledger: %w", err)
	}
	r := bufio.NewReader(f)
	for {
		line, err := r.ReadBytes('\n')
		if err != nil { // a last line without its end: leave it for later
			break
		}
		b.off += int64(len(line))
		var e entry
		if json.Unmarshal(line, &e) == nil && e.Name != "" && !strings.ContainsAny(e.Name, `/\`) {
			b.owners[e.Name] = e.Source
		}
	}
	return b, nil
}

// Owner returns what dir/name was last written for, as its ledger says.
func Owner(dir, name string) (Source, bool) {
	mu.Lock()
	defer mu.Unlock()
	b, err := refresh(filepath.Clean(dir))
	if err != nil {
		return Source{}, false
	}
	s, ok := b.owners[name]
	return s, ok
}

// Check reports whether the files names (plain file names) may be written
// into dir for src: each either does not exist, or the ledger names it as
// written for src, and none is the same file as one of inputs. The folder
// must exist. It writes nothing.
func Check(dir string, src Source, names []string, inputs []string) error {
	mu.Lock()
	defer mu.Unlock()
	return check(filepath.Clean(dir), src, names, inputs)
}

func check(dir string, src Source, names []string, inputs []string) error {
	var ins []os.FileInfo
	for _, in := range inputs {
		if fi, err := os.Stat(in); err == nil {
			ins = append(ins, fi)
		}
	}
	b, err := refresh(dir)
	if err != nil {
		return err
	}
	for _, n := range names {
		if n == "" || n == Name || strings.ContainsAny(n, `/\`) {
			return fmt.Errorf("ledger: %q is not a plain output file name", n)
		}
		p := filepath.Join(dir, n)
		lfi, err := os.Lstat(p)
		if errors.Is(err, fs.ErrNotExist) {
			continue
		}
		if err != nil {
			return fmt.Errorf("ledger: %w", err)
		}
		// Through a link too: the link's target may be an input.
		if fi, err := os.Stat(p); err == nil {
			for _, in := range ins {
				if os.SameFile(fi, in) {
					return &ConflictError{Path: p, Kind: ErrInput}
				}
			}
		}
		for _, in := range ins {
			if os.SameFile(lfi, in) {
				return &ConflictError{Path: p, Kind: ErrInput}
			}
		}
		owner, ok := b.owners[n]
		switch {
		case !ok || !lfi.Mode().IsRegular():
			return &ConflictError{Path: p, Kind: ErrNotOurs}
		case owner != src:
			return &ConflictError{Path: p, Owner: owner, Kind: ErrOtherSource}
		}
	}
	return nil
}

// Claim checks names as Check does and, when they may be written, records
// them in dir's ledger as written for src (before they are written: a run
// that dies half-way leaves only files the ledger names for that source).
// The folder must exist.
func Claim(dir string, src Source, names []string, inputs []string) error {
	dir = filepath.Clean(dir)
	mu.Lock()
	defer mu.Unlock()
	if err := check(dir, src, names, inputs); err != nil {
		return err
	}
	b := books[dir]
	var buf []byte
	for _, n := range names {
		if o, ok := b.owners[n]; ok && o == src {
			continue
		}
		line, err := json.Marshal(entry{Name: n, Source: src})
		if err != nil {
			return fmt.Errorf("ledger: %w", err)
		}
		buf = append(append(buf, line...), '\n')
	}
	if len(buf) == 0 {
		return nil
	}
	p := filepath.Join(dir, Name)
	if fi, err := os.Lstat(p); err == nil && !fi.Mode().IsRegular() {
		return fmt.Errorf("ledger: %s is not a regular file; remove it", p)
	}
	f, err := os.OpenFile(p, os.O_WRONLY|os.O_APPEND|os.O_CREATE, 0o644)
	if err != nil {
		return fmt.Errorf("ledger: recording the outputs in %s: %w", dir, err)
	}
	// One write per line keeps each line whole against other appenders.
	for len(buf) > 0 {
		i := strings.IndexByte(string(buf), '\n') + 1
		if _, err := f.Write(buf[:i]); err != nil {
			f.Close()
			return fmt.Errorf("ledger: recording the outputs in %s: %w", dir, err)
		}
		buf = buf[i:]
	}
	if err := f.Sync(); err != nil {
		f.Close()
		return fmt.Errorf("ledger: recording the outputs in %s: %w", dir, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("ledger: recording the outputs in %s: %w", dir, err)
	}
	// Our own lines are read back by the next refresh like anyone's.
	_, err = refresh(dir)
	return err
}

// Ours reports whether dir/name is a regular file the ledger names.
func Ours(dir, name string) bool {
	fi, err := os.Lstat(filepath.Join(dir, name))
	if err != nil || !fi.Mode().IsRegular() {
		return false
	}
	_, ok := Owner(dir, name)
	return ok
}
