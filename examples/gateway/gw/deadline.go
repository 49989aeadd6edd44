package gw

import (
	"context"
	"sync"
	"sync/atomic"
	"time"
)

// lazyDeadline is a context with a deadline whose timer starts only when
// something waits for it (Done): a decision served from the router's cache
// reads neither Done nor Err, so it costs no timer, while a search (which
// selects on Done) gets the same deadline context.WithDeadline gives. A
// runtime timer per request is not free: in BenchmarkChat (the handler's
// thread CPU, the benchmark goroutine locked to its OS thread, upstream
// over loopback) a context.WithTimeout that was never waited on added
// about 10 µs to a request that passed through, more than a cached
// decision costs. Err reads the clock until the timer exists, so it agrees
// with Done at every moment it can be observed.
//
// It is safe for concurrent use. stop releases the timer, as a
// CancelFunc does.
type lazyDeadline struct {
	parent   context.Context
	deadline time.Time
	once     sync.Once
	inner    atomic.Pointer[timedCtx]
}

type timedCtx struct {
	ctx    context.Context
	cancel context.CancelFunc
}

// withLazyDeadline returns a context that expires at parent's deadline or
// after d, whichever is first, and its stop function.
func withLazyDeadline(parent context.Context, d time.Duration) (*lazyDeadline, func()) {
	dl := time.Now().Add(d)
	if pd, ok := parent.Deadline(); ok && pd.Before(dl) {
		dl = pd
	}
	c := &lazyDeadline{parent: parent, deadline: dl}
	return c, c.stop
}

func (c *lazyDeadline) timed() *timedCtx {
	c.once.Do(func() {
		ctx, cancel := context.WithDeadline(c.parent, c.deadline)
		c.inner.Store(&timedCtx{ctx, cancel})
	})
	return c.inner.Load()
}

// Deadline implements context.Context.
func (c *lazyDeadline) Deadline() (time.Time, bool) { return c.deadline, true }

// Done implements context.Context; the first call starts the timer.
func (c *lazyDeadline) Done() <-chan struct{} { return c.timed().ctx.Done() }

// Err implements context.Context.
func (c *lazyDeadline) Err() error {
	if t := c.inner.Load(); t != nil {
		return t.ctx.Err()
	}
	if err := c.parent.Err(); err != nil {
		return err
	}
	if !time.Now().Before(c.deadline) {
		return context.DeadlineExceeded
	}
	return nil
}

// Value implements context.Context.
func (c *lazyDeadline) Value(key any) any { return c.parent.Value(key) }

// stop ends the context as a CancelFunc does: Done is closed and Err is
// context.Canceled from now on (unless it had expired already), and the
// timer, if one was started, is released.
func (c *lazyDeadline) stop() {
	started := true
	c.once.Do(func() {
		started = false
		c.inner.Store(&timedCtx{ctx: stopped, cancel: func() {}})
	})
	if started {
		c.inner.Load().cancel()
	}
}

// stopped is the inner context of a lazyDeadline stopped before its timer
// started: done, with context.Canceled.
var stopped = func() context.Context {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	return ctx
}()
