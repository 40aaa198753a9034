//go:build linux || darwin

package imaging

import (
	"path/filepath"
	"syscall"
)

// freeBytes is the space free to an ordinary user on the disk that holds
// path's folder; ok is false when the system cannot say.
func freeBytes(path string) (free uint64, ok bool) {
	var st syscall.Statfs_t
	if err := syscall.Statfs(filepath.Dir(path), &st); err != nil {
		return 0, false
	}
	return uint64(st.Bavail) * uint64(st.Bsize), true
}
