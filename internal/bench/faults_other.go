//go:build !linux

package bench

// threadFaults is not available off Linux.
func threadFaults() (minor, major int64) { return 0, 0 }
