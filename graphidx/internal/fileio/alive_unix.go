//go:build unix

package fileio

import (
	"errors"
	"syscall"
)

// ProcessAlive reports whether a process with this pid exists: kill(pid, 0)
// fails with ESRCH only when there is none (EPERM means it exists but
// belongs to another user). A reused pid counts as alive, which only keeps
// a stale file longer.
func ProcessAlive(pid int) bool {
	err := syscall.Kill(pid, 0)
	return !errors.Is(err, syscall.ESRCH)
}
