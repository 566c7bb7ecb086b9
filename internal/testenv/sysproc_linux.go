package testenv

import "syscall"

// sysProcAttr kills the server when the test binary dies, so a crashed or
// killed test leaves no server behind.
func sysProcAttr() *syscall.SysProcAttr {
	return &syscall.SysProcAttr{Pdeathsig: syscall.SIGKILL}
}
