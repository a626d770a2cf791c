//go:build linux

package testkit

import (
	"syscall"
	"time"
)

// ProcessCPU returns the CPU time (user + system) used by this process so
// far. Benchmarks report it beside wall time because the machine is shared:
// wall time then mostly measures the other tenants.
func ProcessCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
