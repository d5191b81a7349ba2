package ingest

import (
	"errors"
	"syscall"
)

// transientErrnos are the system errors that say nothing about a capture,
// only about the moment it was read: the process or system out of file
// descriptors (EMFILE, ENFILE), memory or buffers (ENOMEM, ENOBUFS), a
// call to retry (EAGAIN, EINTR), a file server not answering or a handle
// gone stale (ETIMEDOUT, ESTALE), and EIO, which a network file system
// reports for a server that went away (POSIX.1-2017 errno definitions;
// EIO on a network file system: common practice).
var transientErrnos = []syscall.Errno{
	syscall.EMFILE, syscall.ENFILE, syscall.ENOMEM, syscall.ENOBUFS,
	syscall.EAGAIN, syscall.EINTR, syscall.ETIMEDOUT, syscall.ESTALE, syscall.EIO,
}

// Transient reports whether err, a capture's problem or a failure of its
// analysis, is one that reading the same files again later may not meet:
// a capture failing so is to be tried again after a while, not
// quarantined. Every other error is taken as the capture's own.
func Transient(err error) bool {
	if err == nil {
		return false
	}
	for _, e := range transientErrnos {
		if errors.Is(err, e) {
			return true
		}
	}
	return false
}
