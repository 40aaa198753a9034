//go:build unix

package outfile

import (
	"errors"
	"syscall"
)

// processAlive reports whether a process with this id may be running: only
// "no such process" counts as gone (a process of another user answers
// EPERM, and is alive).
func processAlive(pid int) bool {
	return !errors.Is(syscall.Kill(pid, 0), syscall.ESRCH)
}
