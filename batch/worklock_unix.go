//go:build unix

package batch

import (
	"os"
	"path/filepath"
	"syscall"
)

// lockWork holds an advisory lock (flock(2)) on a file in a batch's scratch
// folder for as long as the batch runs; the kernel drops it when the
// process dies, however it dies.
func lockWork(dir string) (release func(), err error) {
	f, err := os.OpenFile(filepath.Join(dir, ".lock"), os.O_RDWR|os.O_CREATE, 0o600)
	if err != nil {
		return nil, err
	}
	if err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB); err != nil {
		f.Close()
		return nil, err
	}
	return func() { f.Close() }, nil
}

// staleWork reports whether the scratch folder dir was left by a batch that
// no longer runs: its lock file can be locked (or there is none, and the
// folder is older than a minute: killed before it made one).
func staleWork(dir string) bool {
	f, err := os.OpenFile(filepath.Join(dir, ".lock"), os.O_RDWR, 0)
	if err != nil {
		fi, err := os.Stat(dir)
		return err == nil && timeSince(fi.ModTime()) > 60
	}
	defer f.Close()
	if syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB) != nil {
		return false // a running batch holds it
	}
	return true
}
