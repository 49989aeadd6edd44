//go:build !linux

package router

import "time"

// threadCPU falls back to the wall clock off Linux.
func threadCPU() time.Duration { return time.Duration(time.Now().UnixNano()) }
