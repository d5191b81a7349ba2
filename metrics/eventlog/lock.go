package eventlog

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"strconv"
	"strings"
	"time"
)

// ErrLocked is wrapped by Open when another Log, in this process or
// another, holds the log: a log has one writer.
var ErrLocked = errors.New("eventlog: log is held by another writer")

// LockName returns the lock file of the log whose active file is path:
// <path>.lock in the same folder. It is not a segment (Segments and
// Verify do not see it) and it stays in place when the active file is
// renamed or rotated, so the lock covers the log, not one file of it.
func LockName(path string) string { return path + ".lock" }

// writerLock is the one-writer lock of a log: an exclusive advisory lock
// (flock(2), LOCK_EX|LOCK_NB) on LockName, held from Open to Close. The
// kernel drops it when the holder exits, SIGKILL included, so a crashed
// writer never leaves a stale lock behind. The file holds the holder's
// "pid <n> host <name> since <RFC 3339 time>" for the message another
// writer gets.
type writerLock struct{ f *os.File }

// lockLog takes the lock of the log at path, or returns an error wrapping
// ErrLocked that names the lock file and the holder.
func lockLog(path string) (*writerLock, error) {
	name := LockName(path)
	f, err := os.OpenFile(name, os.O_RDWR|os.O_CREATE, 0o640)
	if err != nil {
		return nil, fmt.Errorf("eventlog: lock of %s: %w", path, err)
	}
	if err := flock(f); err != nil {
		holder, _ := os.ReadFile(name)
		f.Close()
		h := strings.TrimSpace(string(bytes.ToValidUTF8(holder, nil)))
		if h == "" {
			h = "holder unknown"
		}
		if errors.Is(err, errWouldBlock) {
			return nil, fmt.Errorf("%w: %s is being written by %s (lock %s); one writer per log: stop that process, or give this one another log.path",
				ErrLocked, path, h, name)
		}
		return nil, fmt.Errorf("eventlog: locking %s: %w", name, err)
	}
	host, _ := os.Hostname()
	id := "pid " + strconv.Itoa(os.Getpid()) + " host " + host + " since " + time.Now().UTC().Format(time.RFC3339) + "\n"
	if err := f.Truncate(0); err == nil {
		f.Write([]byte(id)) // at offset 0 (just opened); the holder's name is a courtesy: the lock is the flock
	}
	return &writerLock{f: f}, nil
}

// release drops the lock. The file stays: removing it would let a third
// writer lock a new file while a second one waits on the old.
func (w *writerLock) release() error {
	if w == nil || w.f == nil {
		return nil
	}
	err := w.f.Close()
	w.f = nil
	return err
}
