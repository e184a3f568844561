//go:build !unix

package batch

// lockWork does nothing where flock(2) is missing.
func lockWork(dir string) (release func(), err error) { return func() {}, nil }

// staleWork never takes another batch's scratch folder for stale here.
func staleWork(dir string) bool { return false }
