package fitters

import (
	"errors"

	"golang.org/x/sys/unix"
)

// setParentDeathSignal asks the kernel to SIGKILL this process when the
// thread that started it exits.
func setParentDeathSignal() error {
	return unix.Prctl(unix.PR_SET_PDEATHSIG, uintptr(unix.SIGKILL), 0, 0, 0)
}

// processAlive reports whether a process with the given id exists.
func processAlive(pid int) bool {
	return !errors.Is(unix.Kill(pid, 0), unix.ESRCH)
}
