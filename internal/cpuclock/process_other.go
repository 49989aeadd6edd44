//go:build !unix

package cpuclock

import "time"

// Process is not available on this system: ok is false.
func Process() (time.Duration, bool) { return 0, false }
