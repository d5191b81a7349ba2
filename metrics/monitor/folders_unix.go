//go:build unix

package monitor

import "syscall"

// canList checks read and search permission on a folder with access(2).
func canList(path string) error {
	return syscall.Access(path, 0x4|0x1) // R_OK | X_OK
}
