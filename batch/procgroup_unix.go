//go:build unix

package batch

import (
	"os/exec"
	"syscall"
)

// Isolate makes cmd, once started, the leader of a process group of its
// own, and makes cancelling its context kill the whole group: a page
// worker past its deadline goes with the helpers it started (pdftoppm,
// say), which would otherwise hold its output pipes open and run on.
func Isolate(cmd *exec.Cmd) {
	if cmd.SysProcAttr == nil {
		cmd.SysProcAttr = &syscall.SysProcAttr{}
	}
	cmd.SysProcAttr.Setpgid = true
	cmd.Cancel = func() error {
		if cmd.Process == nil {
			return nil
		}
		return syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL)
	}
}
