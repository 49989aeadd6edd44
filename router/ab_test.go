package router

import (
	"context"
	"flag"
	"fmt"
	"math/rand/v2"
	"runtime"
	"slices"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/cpuclock"
	"github.com/hopwise/hopwise/internal/stress"
)

var (
	abIndex   = flag.String("ab.index", "", "TestSearchAB: the index file to decide on (e.g. one kept by hopwise bench --index-out)")
	abRounds  = flag.Int("ab.rounds", 48, "TestSearchAB: rounds, each timing both code paths")
	abPasses  = flag.Int("ab.passes", 1, "TestSearchAB: passes over the queries per code path and round")
	abQueries = flag.Int("ab.queries", 4096, "TestSearchAB: queries, drawn as hopwise bench draws them")
	abHub     = flag.Bool("ab.hub", false, "TestSearchAB: queries from and to the entity of largest degree instead (hopwise bench --hub)")
	abHotCopy = flag.Bool("ab.hotcopy", false, "TestSearchAB: the alternative is the same code on the index opened graphidx.WithoutHotCopy (instead of searchHooks.alt)")
)

// TestSearchAB compares, in one process on one index, the search's
// production code with the alternative code path a round of speed work
// keeps under searchHooks.alt (scratch.alt): two routers on the same index,
// one with the hook set, decide the same queries. It first checks that
// every decision is identical, field by field, between the two; then it
// times them in rounds, the two alternating (the order swapped every
// round), each deciding every query -ab.passes times, thread CPU of the
// deciding thread per decision, and reports per round the two p50s and
// p99s and, over the rounds, the median p50 of each, the median paired
// difference (production − alternative) and in how many rounds production
// was faster. Alternating in one process cancels most of what separates
// two processes on a shared machine (their index files, page placement,
// other load), which moves single benchmark runs by up to 15%; changes of
// a few tenths of a microsecond resolve only this way (docs/SEARCH.md).
// Short rounds resolve best: on the 1M-entity benchmark index 48 rounds of
// one pass each (about 25 s) gave one sign in 45 of 48 rounds where 16
// rounds of three passes gave it in 10 to 12 of 16.
// When no alternative is wired in, both routers run the same code and the
// figures measure the harness's own noise. With -ab.hotcopy the
// alternative is instead the same code on a second opening of the file
// without the private copy of its hot sections (graphidx.WithoutHotCopy).
//
// It runs only with HOPWISE_STRESS=1 and an index file:
//
//	HOPWISE_STRESS=1 go test ./router -run TestSearchAB -v -timeout 60m \
//	    -ab.index /tmp/bench1m.hwx [-ab.rounds 48] [-ab.passes 1]
//
// The queries are those of hopwise bench on that index (its 4 096 queries
// of seed 2); the routers have the default bounds and model and no cache,
// as the benchmark's uncached decision.
func TestSearchAB(t *testing.T) {
	stress.Require(t, "one-process A/B comparison of the search")
	if *abIndex == "" {
		t.Skip("set -ab.index to an index file (hopwise bench --entities 1000000 --index-out FILE keeps one)")
	}
	if _, ok := cpuclock.Thread(); !ok {
		t.Skip("no thread CPU clock on this platform")
	}
	ix, err := graphidx.Open(*abIndex)
	if err != nil {
		t.Fatal(err)
	}
	defer ix.Close()
	qs := abQueriesOf(ix, *abQueries, 2)
	if *abHub {
		qs = abHubQueries(ix, *abQueries, 3)
	}
	prod, err := New(ix, WithCacheSize(0))
	if err != nil {
		t.Fatal(err)
	}
	var alt *Router
	if *abHotCopy {
		plain, err := graphidx.Open(*abIndex, graphidx.WithoutHotCopy())
		if err != nil {
			t.Fatal(err)
		}
		defer plain.Close()
		alt, err = New(plain, WithCacheSize(0))
	} else {
		alt, err = New(ix, WithCacheSize(0), withSearchHooks(&searchHooks{alt: true}))
	}
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()

	// Identical decisions, every field (the chain's too).
	differ := 0
	for i, q := range qs {
		a, errA := prod.Decide(ctx, q)
		b, errB := alt.Decide(ctx, q)
		if da, db := abDump(a, errA), abDump(b, errB); da != db {
			if differ < 5 {
				t.Errorf("query %d %+v:\nproduction  %s\nalternative %s", i, q, da, db)
			}
			differ++
		}
	}
	if differ > 0 {
		t.Fatalf("%d of %d decisions differ", differ, len(qs))
	}
	t.Logf("%d decisions identical field by field", len(qs))

	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	cpu := make([]float64, 0, len(qs)**abPasses)
	timeOf := func(r *Router) (p50, p99 float64) {
		cpu = cpu[:0]
		for range *abPasses {
			for _, q := range qs {
				c0, _ := cpuclock.Thread()
				_, err := r.Decide(ctx, q)
				c1, _ := cpuclock.Thread()
				if err != nil {
					t.Fatal(err)
				}
				cpu = append(cpu, float64(c1-c0)/1e3)
			}
		}
		slices.Sort(cpu)
		return cpu[len(cpu)/2], cpu[len(cpu)*99/100]
	}
	var p50P, p50A, p99P, p99A, diff []float64
	faster := 0
	for round := range *abRounds {
		var pp, pa, qp, qa float64
		if round%2 == 0 {
			pp, qp = timeOf(prod)
			pa, qa = timeOf(alt)
		} else {
			pa, qa = timeOf(alt)
			pp, qp = timeOf(prod)
		}
		p50P, p50A, p99P, p99A = append(p50P, pp), append(p50A, pa), append(p99P, qp), append(p99A, qa)
		diff = append(diff, pp-pa)
		if pp < pa {
			faster++
		}
		t.Logf("round %2d: cpu p50 %.2f µs production, %.2f alternative (%+.2f); p99 %.1f, %.1f", round+1, pp, pa, pp-pa, qp, qa)
	}
	t.Logf("%d rounds × %d passes × %d queries: cpu p50 median %.2f µs production, %.2f alternative; paired difference median %+.2f µs; production faster in %d of %d rounds; p99 median %.1f, %.1f µs",
		*abRounds, *abPasses, len(qs), abMedian(p50P), abMedian(p50A), abMedian(diff), faster, *abRounds, abMedian(p99P), abMedian(p99A))
}

// abQueriesOf draws n queries from the index as hopwise bench draws them
// (internal/bench, makeQueriesIx): From uniform, a uniform value of From,
// To uniform and different.
func abQueriesOf(ix *graphidx.Index, n int, seed uint64) []Query {
	rng := rand.New(rand.NewPCG(seed, 0x9b))
	N := ix.NumEntities()
	qs := make([]Query, 0, n)
	for N > 1 && len(qs) < n {
		s, t := graphidx.EntityID(rng.IntN(N)), graphidx.EntityID(rng.IntN(N))
		if s == t {
			continue
		}
		vs := ix.Values(s)
		qs = append(qs, Query{From: ix.Name(s), Value: vs[rng.IntN(len(vs))], To: ix.Name(t)})
	}
	return qs
}

// abHubQueries draws n queries touching the entity of largest degree (the
// hub) as hopwise bench --hub draws them: even ones from it, odd ones to it,
// the other end uniform.
func abHubQueries(ix *graphidx.Index, n int, seed uint64) []Query {
	hub := graphidx.EntityID(0)
	for i := range ix.NumEntities() {
		if ix.Degree(graphidx.EntityID(i)) > ix.Degree(hub) {
			hub = graphidx.EntityID(i)
		}
	}
	rng := rand.New(rand.NewPCG(seed, 0x4b))
	N := ix.NumEntities()
	qs := make([]Query, 0, n)
	for N > 1 && len(qs) < n {
		o := graphidx.EntityID(rng.IntN(N))
		if o == hub {
			continue
		}
		s, t := hub, o
		if len(qs)%2 == 1 {
			s, t = o, hub
		}
		vs := ix.Values(s)
		qs = append(qs, Query{From: ix.Name(s), Value: vs[rng.IntN(len(vs))], To: ix.Name(t)})
	}
	return qs
}

// abDump prints every field of a decision (and of its chain), floats in
// their shortest exact form, so that two equal dumps mean equal decisions.
func abDump(d Decision, err error) string {
	c := d.Chain
	d.Chain = nil // its pointer differs; its fields are printed below
	s := fmt.Sprintf("%+v err=%v", d, err)
	if c != nil {
		s += fmt.Sprintf(" chain=%+v", *c)
	}
	return s
}

func abMedian(x []float64) float64 {
	if len(x) == 0 {
		return 0
	}
	s := slices.Clone(x)
	slices.Sort(s)
	if n := len(s); n%2 == 0 {
		return (s[n/2-1] + s[n/2]) / 2
	}
	return s[len(s)/2]
}
