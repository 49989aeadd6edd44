package testcorpus

import (
	"time"

	"github.com/hopwise/hopwise/internal/cpuclock"
)

// CPUTime is the user+system CPU time of the process so far
// (cpuclock.Process; 0 where it cannot be read), so that the benchmarks
// can report throughput per CPU-second, which stays meaningful on a loaded
// machine where wall-clock figures do not.
func CPUTime() time.Duration {
	d, _ := cpuclock.Process()
	return d
}
