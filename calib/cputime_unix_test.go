//go:build unix

package calib

import "syscall"

// processCPU is the CPU time the whole process has used (all threads, user
// and system), in nanoseconds; 0 when the system does not say.
func processCPU() int64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return ru.Utime.Nano() + ru.Stime.Nano()
}
