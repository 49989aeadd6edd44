package reliability

import (
	"context"
	"runtime"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/cpuclock"
	"github.com/hopwise/hopwise/router"
)

// BenchmarkGuardOverhead measures what graphidx.Index.Guard (the SIGBUS
// guard `hopwise route` puts around every decision) costs on the decision
// path. Each iteration decides a batch of 64 queries plainly and the same
// batch inside Guard (one Guard per decision, as route does), alternating
// the order, timed by the thread's CPU clock (wall clock where there is
// none), so load from other processes affects neither side. It reports
// both per-decision times and their ratio guarded/plain, and checks that
// the decisions agree. "cached" is the cheapest decision (a cache hit), so
// the guard's relative cost is largest there; "uncached" is a full search.
func BenchmarkGuardOverhead(b *testing.B) {
	path := writeIndex(b, b.TempDir(), "g.hwx", GridSource(5000, 6, 9))
	for _, tc := range []struct {
		name  string
		cache int
	}{{"cached", 1024}, {"uncached", 0}} {
		b.Run(tc.name, func(b *testing.B) {
			ix, err := graphidx.Open(path)
			if err != nil {
				b.Fatal(err)
			}
			r, err := router.New(ix, router.WithCacheSize(tc.cache))
			if err != nil {
				b.Fatal(err)
			}
			defer r.Close()
			ctx := context.Background()
			qs := make([]router.Query, 64)
			for i := range qs {
				qs[i] = router.Query{From: GridName(i * 7), Value: twoValues[i%2], To: GridName(i*13 + 1)}
			}
			runtime.LockOSThread()
			defer runtime.UnlockOSThread()
			clock := func() time.Duration {
				if d, ok := cpuclock.Thread(); ok {
					return d
				}
				return time.Duration(time.Now().UnixNano())
			}
			var gains [2][64]float64
			batch := func(guard bool) time.Duration {
				t0 := clock()
				for i, q := range qs {
					var d router.Decision
					var err error
					if guard {
						err = ix.Guard(func() error {
							var derr error
							d, derr = r.Decide(ctx, q)
							return derr
						})
					} else {
						d, err = r.Decide(ctx, q)
					}
					if err != nil {
						b.Fatal(err)
					}
					gains[btoi(guard)][i] = d.Gain
				}
				return clock() - t0
			}
			batch(false) // warm the cache and the map's pages
			var plain, guarded time.Duration
			n := 0
			b.ReportAllocs()
			for b.Loop() {
				if n%2 == 0 {
					plain += batch(false)
					guarded += batch(true)
				} else {
					guarded += batch(true)
					plain += batch(false)
				}
				if gains[0] != gains[1] {
					b.Fatalf("guarded decisions differ from plain ones")
				}
				n++
			}
			per := float64(n * len(qs))
			b.ReportMetric(float64(plain.Nanoseconds())/per, "plain-ns/decision")
			b.ReportMetric(float64(guarded.Nanoseconds())/per, "guarded-ns/decision")
			b.ReportMetric(float64(guarded)/float64(plain), "guarded/plain")
		})
	}
}

func btoi(b bool) int {
	if b {
		return 1
	}
	return 0
}
