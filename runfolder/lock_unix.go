//go:build unix

package runfolder

import (
	"errors"
	"os"
	"syscall"
)

var errLocked = errors.New("locked")

// flock takes an exclusive, non-blocking lock on f.
func flock(f *os.File) error {
	err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB)
	if errors.Is(err, syscall.EWOULDBLOCK) {
		return errLocked
	}
	return err
}
