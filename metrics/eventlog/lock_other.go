//go:build !unix

package eventlog

import (
	"errors"
	"os"
)

var errWouldBlock = errors.New("would block")

// flock refuses where the system has no flock(2): a log whose single
// writer cannot be ensured is not opened for writing.
func flock(*os.File) error {
	return errors.New("eventlog: no file locking on this system; a log needs one writer")
}
