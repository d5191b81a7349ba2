//go:build unix

package metrics

import "syscall"

// openFileLimit is the soft RLIMIT_NOFILE of the process (1024 when it
// cannot be read).
func openFileLimit() uint64 {
	var r syscall.Rlimit
	if err := syscall.Getrlimit(syscall.RLIMIT_NOFILE, &r); err != nil || r.Cur == 0 {
		return 1024
	}
	return uint64(r.Cur)
}
