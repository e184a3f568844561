//go:build !unix

package batch

import "os/exec"

// setGroup does nothing where process groups do not exist.
func setGroup(cmd *exec.Cmd) {}

// killGroup kills the worker process only.
func killGroup(cmd *exec.Cmd) { cmd.Process.Kill() }

// SelfUsage is not measured here.
func SelfUsage() (peakMB, cpuS float64) { return 0, 0 }
