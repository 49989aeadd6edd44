//go:build !linux

package cpuclock

import "time"

// Thread is not available off Linux: ok is false.
func Thread() (time.Duration, bool) { return 0, false }
