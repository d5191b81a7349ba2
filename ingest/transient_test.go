package ingest

import (
	"os"
	"syscall"
	"testing"
)

// TestTransient: the errnos of a moment (POSIX.1-2017 errno definitions)
// against those of the capture.
func TestTransient(t *testing.T) {
	for _, c := range []struct {
		err  error
		want bool
	}{
		{&os.PathError{Op: "open", Err: syscall.EMFILE}, true},
		{&CaptureError{File: "x", Problem: &os.PathError{Op: "read", Err: syscall.EIO}}, true},
		{syscall.ENFILE, true},
		{syscall.ENOMEM, true},
		{syscall.EAGAIN, true},
		{&os.PathError{Op: "open", Err: syscall.ENOENT}, false},
		{&os.PathError{Op: "open", Err: syscall.EACCES}, false},
		{os.ErrInvalid, false},
		{nil, false},
	} {
		if got := Transient(c.err); got != c.want {
			t.Errorf("Transient(%v) = %v, want %v", c.err, got, c.want)
		}
	}
}
