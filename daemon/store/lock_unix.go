//go:build unix

package store

import (
	"errors"

	"golang.org/x/sys/unix"
)

// tryLock takes an exclusive flock on fd without blocking; it reports false
// when another open file description holds it.
func tryLock(fd int) (bool, error) {
	for {
		err := unix.Flock(fd, unix.LOCK_EX|unix.LOCK_NB)
		switch {
		case err == nil:
			return true, nil
		case errors.Is(err, unix.EINTR):
			continue
		case errors.Is(err, unix.EWOULDBLOCK):
			return false, nil
		}
		return false, err
	}
}

// unlock releases the flock on fd.
func unlock(fd int) error { return unix.Flock(fd, unix.LOCK_UN) }
