//go:build !linux

package bench

func threadCPU() int64 { return 0 }

func threadCPUOverhead() (float64, bool) { return 0, false }

func threadFaults() (minor, major int64) { return 0, 0 }

func processCPU() float64 { return -1 }
