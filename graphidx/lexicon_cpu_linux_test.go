//go:build linux

package graphidx

import (
	"syscall"
	"time"
	"unsafe"
)

// threadCPU is the CPU time of the calling OS thread
// (clock_gettime(CLOCK_THREAD_CPUTIME_ID)); callers lock the goroutine to
// its thread. Unlike wall time it does not count time the thread waits for
// a core on a shared machine.
func threadCPU() time.Duration {
	const clockThreadCPUTimeID = 3
	var ts syscall.Timespec
	if _, _, e := syscall.Syscall(syscall.SYS_CLOCK_GETTIME, clockThreadCPUTimeID, uintptr(unsafe.Pointer(&ts)), 0); e != 0 {
		return 0
	}
	return time.Duration(ts.Nano())
}
