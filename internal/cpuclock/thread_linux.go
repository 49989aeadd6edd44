//go:build linux

package cpuclock

import (
	"time"

	"golang.org/x/sys/unix"
)

// Thread returns the calling OS thread's CPU time; ok is false when the
// clock cannot be read.
func Thread() (time.Duration, bool) {
	var ts unix.Timespec
	if err := unix.ClockGettime(unix.CLOCK_THREAD_CPUTIME_ID, &ts); err != nil {
		return 0, false
	}
	return time.Duration(ts.Nano()), true
}
