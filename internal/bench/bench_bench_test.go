package bench

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"runtime"
	"sync"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
	"github.com/hopwise/hopwise/internal/stress"
	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
)

// The benchmarks share one generated index per process: 100k entities at
// average degree 32 (the setting of the ratio figures), 1M with
// HOPWISE_STRESS=1.
// The index is written from the generated Source (byte-identical to a
// graphidx.Build over the contexts, see TestContextsBuildEqualsSource, and
// several times faster to produce).
var shared struct {
	once  sync.Once
	g     *Graph
	ix    *graphidx.Index
	model scorer.Model
	qs    []router.Query
	err   error

	mapOnce, gonumOnce sync.Once
	mb                 *MapBaseline
	gb                 *GonumBaseline
}

func sharedIndex(b *testing.B) {
	b.Helper()
	shared.once.Do(func() {
		n := 100_000
		if stress.On() {
			n = 1_000_000
		}
		g, err := NewGraph(GraphConfig{Entities: n, AvgDegree: 32, Seed: 1})
		if err != nil {
			shared.err = err
			return
		}
		dir, err := os.MkdirTemp("", "hopwise-benchidx-")
		if err != nil {
			shared.err = err
			return
		}
		defer os.RemoveAll(dir) // the mapping stays valid on unix
		path := filepath.Join(dir, "b.hwx")
		if shared.err = graphidx.WriteFile(path, g.Source()); shared.err != nil {
			return
		}
		if shared.ix, shared.err = graphidx.Open(path); shared.err != nil {
			return
		}
		shared.g = g
		shared.model, shared.err = scorer.NewBayes()
		shared.qs = makeQueries(g, 4096, 2)
	})
	if shared.err != nil {
		b.Fatal(shared.err)
	}
}

func benchRouter(b *testing.B, cache int) *router.Router {
	sharedIndex(b)
	rt, err := newRouter(shared.ix, shared.model, DefaultBounds(), cache)
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { rt.Close() })
	return rt
}

// BenchmarkRouterCached: target ≤ 300 ns and 0 allocs per decision.
func BenchmarkRouterCached(b *testing.B) {
	rt := benchRouter(b, 1<<14)
	qs := shared.qs[:256]
	ctx := context.Background()
	for _, q := range qs {
		if _, err := rt.Decide(ctx, q); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportAllocs()
	i := 0
	var d router.Decision
	var err error
	for b.Loop() {
		d, err = rt.Decide(ctx, qs[i&255])
		i++
	}
	if err != nil || !d.Cached || len(d.Values) == 0 {
		b.Fatalf("last decision %+v, %v: want a cache hit", d, err)
	}
}

func reportShares(b *testing.B, n, trunc, chains int) {
	b.ReportMetric(float64(trunc)/float64(n), "truncated/op")
	b.ReportMetric(float64(chains)/float64(n), "chains/op")
	if chains == 0 {
		b.Fatal("no chain found in any decision")
	}
}

// BenchmarkRouterUncached decides distinct queries without the cache. It
// also reports the deciding thread's CPU time per decision (p50, p99),
// which the machine's other load inflates less than ns/op: with
// HOPWISE_STRESS=1 the figures of the 1M-entity rows of docs/SEARCH.md.
func BenchmarkRouterUncached(b *testing.B) {
	rt := benchRouter(b, 0)
	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	var cpu []float64
	decideLoop(b, rt, shared.qs, &cpu)
	if l := summarize(cpu); l.P50 > 0 {
		b.ReportMetric(l.P50/1e3, "cpu-p50-µs")
		b.ReportMetric(l.P99/1e3, "cpu-p99-µs")
	}
}

// decideLoop decides qs in turn under b.Loop and reports the shares of
// truncated decisions and chains (reportShares); with cpu not nil it
// appends each decision's thread CPU time in nanoseconds (the caller locks
// its OS thread).
func decideLoop(b *testing.B, rt *router.Router, qs []router.Query, cpu *[]float64) {
	ctx := context.Background()
	b.ReportAllocs()
	i, trunc, chains := 0, 0, 0
	for b.Loop() {
		c0 := int64(0)
		if cpu != nil {
			c0 = threadCPU()
		}
		d, err := rt.Decide(ctx, qs[i%len(qs)])
		if cpu != nil {
			*cpu = append(*cpu, float64(threadCPU()-c0))
		}
		if err != nil {
			b.Fatal(err)
		}
		if d.Truncated {
			trunc++
		}
		if d.Chain != nil {
			chains++
		}
		i++
	}
	reportShares(b, i, trunc, chains)
}

// BenchmarkRouterUncachedParallel is the throughput counterpart: compare
// its ns/op with BenchmarkRouterUncached at -cpu 1,2.
func BenchmarkRouterUncachedParallel(b *testing.B) {
	rt := benchRouter(b, 0)
	ctx := context.Background()
	var next sync.Mutex
	k := 0
	b.RunParallel(func(pb *testing.PB) {
		next.Lock()
		i := k * 997
		k++
		next.Unlock()
		for pb.Next() {
			if _, err := rt.Decide(ctx, shared.qs[i%len(shared.qs)]); err != nil {
				b.Error(err)
				return
			}
			i++
		}
	})
}

// BenchmarkRouterHub decides queries from and to the highest-degree entity.
func BenchmarkRouterHub(b *testing.B) {
	rt := benchRouter(b, 0)
	hub, deg := shared.g.MaxDegree()
	qs := hubQueries(shared.g, hub, 1024, 3)
	b.ReportMetric(float64(deg), "hub-degree")
	ctx := context.Background()
	b.ReportAllocs()
	i, trunc, chains := 0, 0, 0
	for b.Loop() {
		d, err := rt.Decide(ctx, qs[i%len(qs)])
		if err != nil {
			b.Fatal(err)
		}
		if d.Truncated {
			trunc++
		}
		if d.Chain != nil {
			chains++
		}
		i++
	}
	reportShares(b, i, trunc, chains)
}

func benchBaseline(b *testing.B, decide func(context.Context, router.Query) (Result, error)) {
	ctx := context.Background()
	b.ReportAllocs()
	i, trunc, chains := 0, 0, 0
	for b.Loop() {
		r, err := decide(ctx, shared.qs[i%len(shared.qs)])
		if err != nil {
			b.Fatal(err)
		}
		if r.Truncated {
			trunc++
		}
		if r.HasChain {
			chains++
		}
		i++
	}
	reportShares(b, i, trunc, chains)
}

// BenchmarkBaselineMapBFS is the map[string]map[string] baseline on the
// same queries and bounds as BenchmarkRouterUncached.
func BenchmarkBaselineMapBFS(b *testing.B) {
	sharedIndex(b)
	shared.mapOnce.Do(func() { shared.mb, shared.err = LoadMap(shared.ix, shared.model, DefaultBounds()) })
	if shared.err != nil {
		b.Fatal(shared.err)
	}
	benchBaseline(b, shared.mb.Decide)
}

// BenchmarkBaselineGonum is the gonum graph/simple baseline on the same
// queries and bounds as BenchmarkRouterUncached.
func BenchmarkBaselineGonum(b *testing.B) {
	sharedIndex(b)
	shared.gonumOnce.Do(func() { shared.gb, shared.err = LoadGonum(shared.ix, shared.model, DefaultBounds()) })
	if shared.err != nil {
		b.Fatal(shared.err)
	}
	benchBaseline(b, shared.gb.Decide)
}

// BenchmarkGenerate is the generator alone (one walk over all edges).
func BenchmarkGenerate(b *testing.B) {
	b.ReportAllocs()
	var g *Graph
	var err error
	for b.Loop() {
		g, err = NewGraph(GraphConfig{Entities: 20_000, AvgDegree: 32, Seed: 1})
	}
	if err != nil || g.NumPairs() == 0 {
		b.Fatal(g, err)
	}
	b.ReportMetric(float64(g.NumPairs()), "pairs")
}

// BenchmarkRouterUncachedDense decides distinct queries without the cache
// on a dense index: the greenhouse world of the gateway example (seed 1,
// 30 000 local contexts), 119 entities with about 117 neighbours each, more
// than the rank prefix, so every search fills both layers. The cached row
// is the baseline of the same run (the cost a repeated question pays).
// The uncached row also reports the deciding thread's CPU time per
// decision (p50, p99), which the machine's other load inflates less than
// ns/op.
func BenchmarkRouterUncachedDense(b *testing.B) {
	w, err := world.Greenhouse(1)
	if err != nil {
		b.Fatal(err)
	}
	cond, err := world.ConditionByName(world.CondLocalGeometric)
	if err != nil {
		b.Fatal(err)
	}
	var buf bytes.Buffer
	if _, err := w.WriteCorpus(context.Background(), &buf, 30000, cond, 1); err != nil {
		b.Fatal(err)
	}
	path := filepath.Join(b.TempDir(), "dense.hwx")
	rd := corpus.NewJSONLReader(&buf, "greenhouse.jsonl", graphidx.WithPolicy(graphidx.Strict))
	if _, err := graphidx.Build(context.Background(), rd, path); err != nil {
		b.Fatal(err)
	}
	ix, err := graphidx.Open(path)
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { ix.Close() })
	model, err := scorer.NewBayes()
	if err != nil {
		b.Fatal(err)
	}
	qs := makeQueriesIx(ix, 4096, 2)
	for _, tc := range []struct {
		name  string
		cache int
	}{{"uncached", 0}, {"cached", 2 * len(qs)}} {
		b.Run(tc.name, func(b *testing.B) {
			rt, err := newRouter(ix, model, DefaultBounds(), tc.cache)
			if err != nil {
				b.Fatal(err)
			}
			defer rt.Close()
			ctx := context.Background()
			if tc.cache > 0 {
				for _, q := range qs { // every timed call is a hit
					if _, err := rt.Decide(ctx, q); err != nil {
						b.Fatal(err)
					}
				}
			}
			var cpu []float64
			rec := &cpu
			if tc.cache > 0 {
				rec = nil
			} else {
				runtime.LockOSThread()
				defer runtime.UnlockOSThread()
			}
			decideLoop(b, rt, qs, rec)
			if l := summarize(cpu); l.P50 > 0 {
				b.ReportMetric(l.P50/1e3, "cpu-p50-µs")
				b.ReportMetric(l.P99/1e3, "cpu-p99-µs")
			}
		})
	}
}
