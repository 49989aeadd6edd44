//go:build linux

package gw_test

import (
	"time"

	"golang.org/x/sys/unix"
)

// threadCPU is the calling thread's CPU time (CLOCK_THREAD_CPUTIME_ID), so
// that benchmarks compare CPU spent rather than wall time on a shared
// machine; ok is false when the clock cannot be read. The caller locks its
// OS thread.
func threadCPU() (time.Duration, bool) {
	var ts unix.Timespec
	if err := unix.ClockGettime(unix.CLOCK_THREAD_CPUTIME_ID, &ts); err != nil {
		return 0, false
	}
	return time.Duration(ts.Nano()), true
}
