//go:build !unix

package otelx

// cpuNanos is not measured on this platform; the overhead test then
// reports wall time only (CPU figures read 0).
func cpuNanos() int64 { return 0 }
