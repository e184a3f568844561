//go:build unix && !linux

package batch

import "syscall"

// dieWithParent has no equivalent here: a worker whose batch was killed
// ends when it next reads its closed standard input.
func dieWithParent(a *syscall.SysProcAttr) {}
