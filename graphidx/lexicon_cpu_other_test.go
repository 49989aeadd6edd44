//go:build !linux

package graphidx

import "time"

var cpuEpoch = time.Now()

// threadCPU falls back to monotonic wall time where the thread CPU clock is
// not read.
func threadCPU() time.Duration { return time.Since(cpuEpoch) }
