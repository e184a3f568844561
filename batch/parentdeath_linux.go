package batch

import "syscall"

// dieWithParent asks Linux to kill the worker when the batch that started
// it dies, even by kill -9 (prctl PR_SET_PDEATHSIG, prctl(2)), so no worker
// outlives its batch.
func dieWithParent(a *syscall.SysProcAttr) { a.Pdeathsig = syscall.SIGKILL }
