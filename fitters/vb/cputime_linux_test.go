//go:build linux

package vb

import (
	"syscall"
	"time"
)

// processCPU returns the user plus system CPU time of this process, so that
// benchmarks can report CPU time per iteration on a shared machine.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
