//go:build unix

package record

import (
	"errors"
	"os"
	"syscall"
)

// flockNB takes an exclusive flock on f without waiting. The kernel drops
// it when the process ends, however it ends.
func flockNB(f *os.File) error {
	return syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB)
}

// flockWait takes an exclusive flock on f, waiting for it.
func flockWait(f *os.File) error {
	return syscall.Flock(int(f.Fd()), syscall.LOCK_EX)
}

// flockBusy tells whether flockNB failed because another holds the lock.
func flockBusy(err error) bool { return errors.Is(err, syscall.EWOULDBLOCK) }
