//go:build race

package router

// raceEnabled: under -race, sync.Pool drops a share of its items on
// purpose, so allocation counts are not meaningful.
const raceEnabled = true
