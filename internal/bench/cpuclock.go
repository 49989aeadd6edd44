package bench

import "github.com/hopwise/hopwise/internal/cpuclock"

// threadCPU returns the calling OS thread's CPU time in nanoseconds
// (cpuclock.Thread), 0 where that clock is not available; the caller locks
// its thread.
func threadCPU() int64 {
	d, _ := cpuclock.Thread()
	return int64(d)
}

// threadCPUOverhead returns the median cost of one threadCPU pair and
// whether the clock works.
func threadCPUOverhead() (float64, bool) {
	if _, ok := cpuclock.Thread(); !ok {
		return 0, false
	}
	ns := make([]float64, 2000)
	for i := range ns {
		c := threadCPU()
		ns[i] = float64(threadCPU() - c)
	}
	return summarize(ns).P50, true
}

// processCPU returns the process's user+system CPU time in seconds
// (cpuclock.Process), or -1.
func processCPU() float64 {
	d, ok := cpuclock.Process()
	if !ok {
		return -1
	}
	return d.Seconds()
}
