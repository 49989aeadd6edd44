//go:build linux

package router

import (
	"time"

	"golang.org/x/sys/unix"
)

// threadCPU is the calling thread's CPU time (CLOCK_THREAD_CPUTIME_ID), so
// that the text-overhead benchmark compares CPU spent rather than wall time
// on a shared machine. The caller locks its OS thread.
func threadCPU() time.Duration {
	var ts unix.Timespec
	if err := unix.ClockGettime(unix.CLOCK_THREAD_CPUTIME_ID, &ts); err != nil {
		return time.Duration(time.Now().UnixNano())
	}
	return time.Duration(ts.Nano())
}
