package ledger

import (
	"io/fs"
	"syscall"
)

// sysIdentity reads the device, inode and status change time (ns since
// 1970) from the system's stat structure.
func sysIdentity(st fs.FileInfo) (dev, ino uint64, ctime int64) {
	s, ok := st.Sys().(*syscall.Stat_t)
	if !ok {
		return 0, 0, 0
	}
	return uint64(s.Dev), uint64(s.Ino), s.Ctim.Nano()
}
