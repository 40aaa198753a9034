//go:build !linux && !darwin

package imaging

// freeBytes cannot ask this system for the free space: the write itself
// will fail, whole or not at all, when the disk fills.
func freeBytes(string) (uint64, bool) { return 0, false }
