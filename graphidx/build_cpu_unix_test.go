//go:build unix

package graphidx

import (
	"syscall"
	"time"
)

// cpuTime is the user+system CPU time of the process so far, so that the
// build benchmarks can report throughput per CPU-second, which stays
// meaningful on a loaded machine where wall-clock figures do not.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
