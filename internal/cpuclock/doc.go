// Package cpuclock reads CPU clocks for benchmarks and load tests: the
// calling OS thread's CPU time and the process's. On a shared machine,
// CPU time measures the work done where wall time also counts the time a
// thread waited for a core, so the repository's benchmarks compare CPU
// time, as ratios measured in one run.
//
// Thread reads CLOCK_THREAD_CPUTIME_ID (clock_gettime(2), Linux); the
// caller locks its goroutine to its OS thread (runtime.LockOSThread) for the
// span it measures. Process reads getrusage(RUSAGE_SELF), user + system
// (Unix). Each returns ok = false where its clock is not available, and
// the caller picks its own fallback. Both are safe for concurrent use and
// cost one system call (tens of nanoseconds with the vDSO for Thread).
package cpuclock
