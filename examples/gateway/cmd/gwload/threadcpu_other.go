//go:build !linux

package main

import "time"

// threadCPU is not available here: the handler CPU phase is skipped.
func threadCPU() (time.Duration, bool) { return 0, false }
