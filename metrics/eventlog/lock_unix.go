//go:build unix

package eventlog

import (
	"os"
	"syscall"
)

var errWouldBlock error = syscall.EWOULDBLOCK

// flock takes an exclusive flock(2) on f without waiting, retrying on
// EINTR.
func flock(f *os.File) error {
	for {
		err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB)
		if err != syscall.EINTR {
			return err
		}
	}
}
