//go:build !linux

package reliability

import "time"

// threadCPU is unavailable here: the checks fall back to wall time.
func threadCPU() (time.Duration, bool) { return 0, false }
