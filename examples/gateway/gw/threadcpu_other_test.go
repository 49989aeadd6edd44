//go:build !linux

package gw_test

import "time"

// threadCPU is not available here: benchmarks report wall time only.
func threadCPU() (time.Duration, bool) { return 0, false }
