package ledger

import (
	"crypto/sha256"
	"encoding/hex"
	"io"
	"os"
	"syscall"
)

// FileID is a data file's identity: what changes when its content can
// have changed. dev and ino are 0 where the system has none.
type FileID struct {
	size, mtime, ctime int64 // bytes; modification and status change times, ns since 1970
	dev, ino           uint64
}

// Identify returns the identity of the file at path, following a symbolic
// link when follow is set, and whether it is a regular file (the only kind
// worth remembering).
func Identify(path string, follow bool) (FileID, bool) {
	stat := os.Lstat
	if follow {
		stat = os.Stat
	}
	st, err := stat(path)
	if err != nil || !st.Mode().IsRegular() {
		return FileID{}, false
	}
	id := FileID{size: st.Size(), mtime: st.ModTime().UnixNano()}
	id.dev, id.ino, id.ctime = sysIdentity(st)
	return id, true
}

// HashFile is the lowercase hex SHA-256 (FIPS 180-4) of a regular file, ""
// if it cannot be read. A symbolic link is followed only with follow.
func HashFile(path string, follow bool) string {
	// Stat first: opening a FIFO for reading would block until a writer
	// came, stalling the daemon.
	stat := os.Lstat
	if follow {
		stat = os.Stat
	}
	if st, err := stat(path); err != nil || !st.Mode().IsRegular() {
		return ""
	}
	f, err := os.OpenFile(path, os.O_RDONLY|syscall.O_NONBLOCK, 0)
	if err != nil {
		return ""
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil || !st.Mode().IsRegular() {
		return ""
	}
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return ""
	}
	return hex.EncodeToString(h.Sum(nil))
}
