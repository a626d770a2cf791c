//go:build !linux

package fitters

// setParentDeathSignal is a no-op where the kernel has no parent-death
// signal; Serve's polling of the parent process id covers those platforms.
func setParentDeathSignal() error { return nil }

// processAlive cannot be checked portably; it reports true so that only the
// parent process id polling applies.
func processAlive(int) bool { return true }
