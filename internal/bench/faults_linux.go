package bench

import "golang.org/x/sys/unix"

// threadFaults returns the calling thread's minor and major page faults
// (getrusage(RUSAGE_THREAD)).
func threadFaults() (minor, major int64) {
	var ru unix.Rusage
	if err := unix.Getrusage(unix.RUSAGE_THREAD, &ru); err != nil {
		return 0, 0
	}
	return ru.Minflt, ru.Majflt
}
