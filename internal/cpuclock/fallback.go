package cpuclock

import "time"

// wallEpoch anchors ThreadOrWall's fallback.
var wallEpoch = time.Now()

// ThreadOrWall returns Thread's reading, or the monotonic wall time since
// the package was loaded where the thread clock is not available: for
// benchmarks that report a figure either way (differences of two readings
// are then wall time, which counts waiting for a core).
func ThreadOrWall() time.Duration {
	if d, ok := Thread(); ok {
		return d
	}
	return time.Since(wallEpoch)
}
