//go:build unix

package batch

import (
	"os/exec"
	"runtime"
	"syscall"
)

// setGroup makes cmd, once started, the leader of a process group of its
// own, so killGroup ends it with the helpers it started (poppler's pdftoppm
// for a PDF page, say), which would otherwise hold its pipes open and run
// on.
func setGroup(cmd *exec.Cmd) {
	if cmd.SysProcAttr == nil {
		cmd.SysProcAttr = &syscall.SysProcAttr{}
	}
	cmd.SysProcAttr.Setpgid = true
	dieWithParent(cmd.SysProcAttr)
}

func killGroup(cmd *exec.Cmd) {
	syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL)
}

// SelfUsage returns this process's peak resident memory in MB and its
// processor time (user + system) in seconds, from getrusage(2). Linux gives
// ru_maxrss in kilobytes, macOS in bytes.
func SelfUsage() (peakMB, cpuS float64) {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0, 0
	}
	kb := float64(ru.Maxrss)
	if runtime.GOOS == "darwin" {
		kb /= 1024
	}
	tv := func(t syscall.Timeval) float64 { return float64(t.Sec) + float64(t.Usec)/1e6 }
	return kb / 1024, tv(ru.Utime) + tv(ru.Stime)
}
