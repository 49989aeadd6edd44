//go:build linux

package reliability

import (
	"time"

	"golang.org/x/sys/unix"
)

// threadCPU returns the calling OS thread's CPU time
// (clock_gettime(CLOCK_THREAD_CPUTIME_ID)) and whether the clock works;
// the caller locks its goroutine to the thread.
func threadCPU() (time.Duration, bool) {
	var ts unix.Timespec
	if err := unix.ClockGettime(unix.CLOCK_THREAD_CPUTIME_ID, &ts); err != nil {
		return 0, false
	}
	return time.Duration(ts.Nano()), true
}
