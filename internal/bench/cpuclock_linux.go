package bench

import "golang.org/x/sys/unix"

// threadCPU returns the calling OS thread's CPU time in nanoseconds
// (clock_gettime(CLOCK_THREAD_CPUTIME_ID)); the caller locks its thread.
func threadCPU() int64 {
	var ts unix.Timespec
	if err := unix.ClockGettime(unix.CLOCK_THREAD_CPUTIME_ID, &ts); err != nil {
		return 0
	}
	return ts.Nano()
}

// threadCPUOverhead returns the median cost of one threadCPU pair and
// whether the clock works.
func threadCPUOverhead() (float64, bool) {
	if threadCPU() == 0 {
		return 0, false
	}
	ns := make([]float64, 2000)
	for i := range ns {
		c := threadCPU()
		ns[i] = float64(threadCPU() - c)
	}
	return summarize(ns).P50, true
}

// threadFaults returns the calling thread's minor and major page faults
// (getrusage(RUSAGE_THREAD)).
func threadFaults() (minor, major int64) {
	var ru unix.Rusage
	if err := unix.Getrusage(unix.RUSAGE_THREAD, &ru); err != nil {
		return 0, 0
	}
	return ru.Minflt, ru.Majflt
}

// processCPU returns the process's user+system CPU time in seconds, or -1.
func processCPU() float64 {
	var ru unix.Rusage
	if err := unix.Getrusage(unix.RUSAGE_SELF, &ru); err != nil {
		return -1
	}
	return float64(ru.Utime.Nano()+ru.Stime.Nano()) / 1e9
}
