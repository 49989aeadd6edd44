package gw

import (
	"context"
	"errors"
	"sync"
	"testing"
	"time"
)

type ctxKey struct{}

// TestLazyDeadline: the lazy deadline behaves as context.WithTimeout at
// every moment it can be observed: before and after its timer starts,
// expired, stopped, under a cancelled or earlier-expiring parent, and
// with Done, Err and stop called concurrently.
func TestLazyDeadline(t *testing.T) {
	t.Parallel()
	isDone := func(c context.Context) bool {
		select {
		case <-c.Done():
			return true
		default:
			return false
		}
	}
	parent := context.WithValue(context.Background(), ctxKey{}, "v")

	c, stop := withLazyDeadline(parent, time.Hour)
	if dl, ok := c.Deadline(); !ok || time.Until(dl) < 59*time.Minute {
		t.Errorf("deadline %v %v, want an hour from now", dl, ok)
	}
	if c.Err() != nil || c.Value(ctxKey{}) != "v" || c.inner.Load() != nil {
		t.Errorf("fresh: err %v, value %v, timer started %v", c.Err(), c.Value(ctxKey{}), c.inner.Load() != nil)
	}
	if isDone(c) || c.Err() != nil || c.inner.Load() == nil { // Done started the timer
		t.Error("waited on: done early, or no timer")
	}
	stop()
	if !isDone(c) || !errors.Is(c.Err(), context.Canceled) {
		t.Errorf("stopped after start: done %v, err %v", isDone(c), c.Err())
	}

	c, stop = withLazyDeadline(parent, time.Hour)
	stop() // before any timer
	if !isDone(c) || !errors.Is(c.Err(), context.Canceled) {
		t.Errorf("stopped before start: done %v, err %v", isDone(c), c.Err())
	}
	stop() // idempotent

	c, stop = withLazyDeadline(parent, -time.Second) // already expired
	if !errors.Is(c.Err(), context.DeadlineExceeded) || !isDone(c) || !errors.Is(c.Err(), context.DeadlineExceeded) {
		t.Errorf("expired: err %v, done %v", c.Err(), isDone(c))
	}
	stop()
	if !errors.Is(c.Err(), context.DeadlineExceeded) {
		t.Errorf("expired, then stopped: err %v", c.Err())
	}

	pc, pcancel := context.WithCancel(parent)
	c, stop = withLazyDeadline(pc, time.Hour)
	pcancel()
	if !errors.Is(c.Err(), context.Canceled) || !isDone(c) {
		t.Errorf("parent cancelled: err %v, done %v", c.Err(), isDone(c))
	}
	stop()

	early := time.Now().Add(time.Minute)
	pd, pdcancel := context.WithDeadline(parent, early)
	defer pdcancel()
	c, stop = withLazyDeadline(pd, time.Hour)
	if dl, _ := c.Deadline(); !dl.Equal(early) {
		t.Errorf("deadline %v, want the parent's %v", dl, early)
	}
	stop()

	// The timer fires: wait for it (no bound on how late it may be).
	c, stop = withLazyDeadline(parent, time.Millisecond)
	select {
	case <-c.Done():
	case <-time.After(time.Minute):
		t.Fatal("the deadline never fired")
	}
	if !errors.Is(c.Err(), context.DeadlineExceeded) {
		t.Errorf("fired: err %v", c.Err())
	}
	stop()

	c, stop = withLazyDeadline(parent, time.Hour)
	var wg sync.WaitGroup
	for i := range 16 {
		wg.Go(func() {
			if i%2 == 0 {
				<-c.Done() // closed by stop
			}
			_ = c.Err()
		})
	}
	wg.Go(stop)
	wg.Wait()
	if !isDone(c) || !errors.Is(c.Err(), context.Canceled) {
		t.Errorf("concurrent: done %v, err %v", isDone(c), c.Err())
	}
}
