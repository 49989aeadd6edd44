//go:build unix

package testcorpus

import (
	"syscall"
	"time"
)

// CPUTime is the user+system CPU time of the process so far, so that the
// benchmarks can report throughput per CPU-second, which stays meaningful on
// a loaded machine where wall-clock figures do not.
func CPUTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
