//go:build !unix

package batch

import "os/exec"

// Isolate is a no-op where process groups do not exist: cancelling the
// context kills the worker process only (exec.CommandContext's default).
func Isolate(cmd *exec.Cmd) {}
