package cpuclock_test

import (
	"runtime"
	"testing"

	"github.com/hopwise/hopwise/internal/cpuclock"
)

// TestClocksAdvance: spinning on a locked thread advances both clocks. A
// clock that is not available is skipped.
func TestClocksAdvance(t *testing.T) {
	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	t0, tok := cpuclock.Thread()
	p0, pok := cpuclock.Process()
	x := 0
	for i := range 30_000_000 {
		x += i ^ (x >> 3)
	}
	t1, _ := cpuclock.Thread()
	p1, _ := cpuclock.Process()
	if x == 42 {
		t.Log(x)
	}
	if tok && t1 <= t0 {
		t.Errorf("thread clock did not advance: %v → %v", t0, t1)
	}
	if pok && p1 <= p0 {
		t.Errorf("process clock did not advance: %v → %v", p0, p1)
	}
}
