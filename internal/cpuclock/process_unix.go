//go:build unix

package cpuclock

import (
	"time"

	"golang.org/x/sys/unix"
)

// Process returns the process's user + system CPU time so far; ok is false
// when it cannot be read.
func Process() (time.Duration, bool) {
	var ru unix.Rusage
	if err := unix.Getrusage(unix.RUSAGE_SELF, &ru); err != nil {
		return 0, false
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano()), true
}
