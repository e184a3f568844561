package calib

import (
	"os/exec"
	"syscall"
)

// dieWithUs makes Linux kill a helper program (pdftoppm, pdfinfo) when
// this process dies, even by kill -9 (prctl PR_SET_PDEATHSIG, prctl(2)), so
// none is left running.
func dieWithUs(cmd *exec.Cmd) {
	if cmd.SysProcAttr == nil {
		cmd.SysProcAttr = &syscall.SysProcAttr{}
	}
	cmd.SysProcAttr.Pdeathsig = syscall.SIGKILL
}
