package reliability

import (
	"context"
	"errors"
	"fmt"
	"path/filepath"
	"sync"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// hubLeaves is the number of leaves of the adversarial hub index: 200k by
// default (a few seconds to write), one million with HOPWISE_STRESS=1.
func hubLeaves() int {
	if stress() {
		return 1_000_000
	}
	return 200_000
}

var (
	hubOnce sync.Once
	hubPath string
	hubErr  error
	hubTime time.Duration
)

// hubIndex writes the HubSource index once per test process (shared by the
// bounded-work test and BenchmarkHubAttack) and returns its path.
func hubIndex(t testing.TB) string {
	t.Helper()
	hubOnce.Do(func() {
		dir, err := osMkdirTemp("hopwise-hub-")
		if err != nil {
			hubErr = err
			return
		}
		cleanupDirs = append(cleanupDirs, dir)
		hubPath = filepath.Join(dir, "hub.hwx")
		start := time.Now()
		hubErr = graphidx.WriteFile(hubPath, HubSource(hubLeaves()))
		hubTime = time.Since(start)
	})
	if hubErr != nil {
		t.Fatalf("write hub index: %v", hubErr)
	}
	return hubPath
}

// hubQueries are the adversarial queries over the hub index: hub to hub
// (every leaf is a one-bridge chain), hub to leaf (the hub's million-entry
// adjacency against a leaf's), leaf to leaf (no direct pair; two chains
// through the hubs) and leaf to hub.
func hubQueries(i int) router.Query {
	leaves := hubLeaves()
	switch i % 4 {
	case 0:
		return router.Query{From: HubA, Value: "open", To: HubB}
	case 1:
		return router.Query{From: HubA, Value: "closed", To: LeafName((i * 7919) % leaves)}
	case 2:
		return router.Query{From: LeafName((i * 31) % leaves), Value: "open", To: LeafName((i*131 + 1) % leaves)}
	default:
		return router.Query{From: LeafName((i * 17) % leaves), Value: "closed", To: HubB}
	}
}

// TestBoundedWork: adversarial queries each return within their budget.
//
//   - Hub attack: two hubs sharing 200k (1M under stress) neighbours. With
//     the default expansion budget every query returns, and a query whose
//     search was cut says so (Truncated, with the cut named).
//   - Deadline: with an unlimited expansion budget and a 20 ms deadline, a
//     hub-to-hub search stops at the deadline (Cut deadline), not after
//     walking the million-entry lists.
//   - Long chains: a 5000-entity path; the ends have no chain of ≤ 3
//     bridges (no-chain), a 3-bridge gap is found exactly.
//   - Every query unknown: clear ErrUnknownEntity / ErrUnknownValue errors,
//     or the configured fallback reason.
//   - A context already expired: the context's error, immediately.
func TestBoundedWork(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	p := hubIndex(t)
	t.Logf("hub index: %d leaves written in %v", hubLeaves(), hubTime.Round(time.Millisecond))
	ix, err := graphidx.Open(p, graphidx.WithLazyVerify())
	if err != nil {
		t.Fatal(err)
	}
	if d := ix.Degree(0); d != hubLeaves()+1 {
		t.Fatalf("hub degree %d, want %d", d, hubLeaves()+1)
	}
	r, err := router.New(ix, router.WithCacheSize(0))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()

	// 1. Hub attack under the default expansion budget. The bound is on
	// the work of one call (thread CPU time where the clock works, see
	// measured.work): a generous ceiling for a race-instrumented search;
	// the measured p50/p99 are logged.
	const ceiling = 2 * time.Second
	var lat, cpu []time.Duration
	truncated := 0
	for i := range 200 {
		q := hubQueries(i)
		var d router.Decision
		var err error
		m := measure(func() { d, err = r.Decide(ctx, q) })
		lat = append(lat, m.wall)
		cpu = append(cpu, m.cpu)
		if err != nil {
			t.Fatalf("%+v: %v", q, err)
		}
		if m.work() > ceiling {
			t.Fatalf("%+v took %v (wall %v, thread CPU %v; > %v): the search is not bounded", q, m.work(), m.wall, m.cpu, ceiling)
		}
		if d.Truncated {
			truncated++
			if d.Cut == 0 {
				t.Fatalf("%+v: truncated without a named cut", q)
			}
		}
		if q.From == HubA && q.To == HubB && !d.Truncated {
			t.Fatalf("hub-to-hub over %d shared neighbours was not truncated: %+v", hubLeaves(), d)
		}
	}
	t.Logf("hub attack, default budget: wall p50 %v p99 %v max %v; thread CPU p50 %v p99 %v; %d/200 truncated",
		percentile(lat, 0.5), percentile(lat, 0.99), percentile(lat, 1), percentile(cpu, 0.5), percentile(cpu, 0.99), truncated)

	// 2. The deadline bounds the search when the expansion budget does not:
	// the work done in the call stays within the deadline plus a slack for
	// polling and race instrumentation, where the unlimited budget alone
	// would walk the hub lists and score 65,536 candidates for seconds.
	if err := r.Reconfigure(router.WithExpansionBudget(1<<30), router.WithBeam(1<<20), router.WithMaxCandidates(1<<16)); err != nil {
		t.Fatal(err)
	}
	const deadline = 20 * time.Millisecond
	const slack = 500 * time.Millisecond
	for _, q := range []router.Query{hubQueries(0), hubQueries(1)} {
		dctx, cancel := context.WithTimeout(ctx, deadline)
		var d router.Decision
		var err error
		m := measure(func() { d, err = r.Decide(dctx, q) })
		cancel()
		switch {
		case err != nil && !errors.Is(err, context.DeadlineExceeded):
			t.Fatalf("%+v with deadline: %v", q, err)
		case m.work() > deadline+slack:
			t.Fatalf("%+v with a %v deadline worked %v (wall %v, thread CPU %v)", q, deadline, m.work(), m.wall, m.cpu)
		case err == nil && m.work() > 5*deadline && d.Cut&router.CutDeadline == 0:
			// Far past the deadline and not cut by it: the search ignored
			// it (a small overshoot can be scheduling on a loaded box).
			t.Fatalf("%+v worked %v, past its %v deadline, without Cut deadline: %+v", q, m.work(), deadline, d)
		}
		t.Logf("unbounded budget, %v deadline: %s→%s returned in %v wall, %v thread CPU (truncated=%v cut=%s err=%v)",
			deadline, q.From, q.To, m.wall.Round(time.Microsecond), m.cpu.Round(time.Microsecond), d.Truncated, d.Cut, err)
	}

	// 3. A context already expired returns its error at once.
	dead, cancel := context.WithCancel(ctx)
	cancel()
	var err2 error
	m := measure(func() { _, err2 = r.Decide(dead, hubQueries(0)) })
	if !errors.Is(err2, context.Canceled) {
		t.Fatalf("expired context: err %v, want context.Canceled", err2)
	}
	if m.work() > 100*time.Millisecond {
		t.Fatalf("expired context worked %v (wall %v)", m.work(), m.wall)
	}
	past, cancel2 := context.WithDeadline(ctx, time.Now().Add(-time.Second))
	defer cancel2()
	if _, err := r.Decide(past, hubQueries(1)); !errors.Is(err, context.DeadlineExceeded) {
		t.Fatalf("past deadline: err %v, want context.DeadlineExceeded", err)
	}

	// 4. Every query unknown.
	for i := range 1000 {
		q := router.Query{From: fmt.Sprintf("ghost-%d", i), Value: "open", To: HubA}
		if i%3 == 1 {
			q = router.Query{From: HubA, Value: "open", To: fmt.Sprintf("ghost-%d", i)}
		}
		want := router.ErrUnknownEntity
		if i%3 == 2 {
			q = router.Query{From: HubA, Value: fmt.Sprintf("ajar-%d", i), To: HubB}
			want = router.ErrUnknownValue
		}
		if _, err := r.Decide(ctx, q); !errors.Is(err, want) {
			t.Fatalf("%+v: err %v, want %v", q, err, want)
		}
	}
	if err := r.Reconfigure(router.WithFallback(router.ModeDirect)); err != nil {
		t.Fatal(err)
	}
	d, err := r.Decide(ctx, router.Query{From: "ghost", Value: "open", To: HubA})
	if err != nil || d.Reason.Code != router.ReasonUnknownEntityFallback || d.Mode != router.ModeDirect {
		t.Fatalf("fallback: %+v, %v", d, err)
	}
}

// TestLongChain: on a long path, the ends have no chain within H = 3
// bridges and the router says so (no-chain) without error; a gap of
// exactly four hops is bridged by the three entities between.
func TestLongChain(t *testing.T) {
	t.Parallel()
	const n = 5000
	p := writeIndex(t, t.TempDir(), "chain.hwx", ChainSource(n))
	ix, err := graphidx.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	r, err := router.New(ix)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	ctx := context.Background()
	d, err := r.Decide(ctx, router.Query{From: ChainName(0), Value: "open", To: ChainName(n - 1)})
	if err != nil {
		t.Fatal(err)
	}
	if d.Chain != nil || d.Reason.Code != router.ReasonNoChain || d.Mode != router.ModeDirect {
		t.Fatalf("ends of a %d-path: %+v, want direct / no-chain", n, d)
	}
	d, err = r.Decide(ctx, router.Query{From: ChainName(10), Value: "open", To: ChainName(14)})
	if err != nil {
		t.Fatal(err)
	}
	want := []string{ChainName(11), ChainName(12), ChainName(13)}
	if d.Chain == nil || fmt.Sprint(d.Chain.Bridges) != fmt.Sprint(want) {
		t.Fatalf("4-hop gap: chain %+v, want bridges %v", d.Chain, want)
	}
}

// BenchmarkHubAttack measures hub-attack decisions (hubQueries, cache off,
// default bounds) and reports their p50 and p99 latency.
func BenchmarkHubAttack(b *testing.B) {
	ix, err := graphidx.Open(hubIndex(b), graphidx.WithLazyVerify())
	if err != nil {
		b.Fatal(err)
	}
	r, err := router.New(ix, router.WithCacheSize(0))
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	ctx := context.Background()
	b.ReportAllocs()
	var lat []time.Duration
	truncated, i := 0, 0
	for b.Loop() {
		start := time.Now()
		d, err := r.Decide(ctx, hubQueries(i))
		lat = append(lat, time.Since(start))
		if err != nil {
			b.Fatal(err)
		}
		if d.Truncated {
			truncated++
		}
		i++
	}
	if i > 4 && truncated == 0 {
		b.Fatal("no hub decision was truncated: the attack did not hit a bound")
	}
	b.ReportMetric(float64(percentile(lat, 0.5).Nanoseconds()), "p50-ns")
	b.ReportMetric(float64(percentile(lat, 0.99).Nanoseconds()), "p99-ns")
	b.ReportMetric(float64(truncated)/float64(i), "truncated/op")
}
