package router

import (
	"context"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"sync"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/stress"
)

var benchIdx struct {
	sync.Once
	ix  *graphidx.Index
	src *powerLawSource
	err error
}

// benchIndex builds (once per process) a power-law index of 50k entities,
// 1M with HOPWISE_STRESS=1.
func benchIndex(b *testing.B) (*graphidx.Index, *powerLawSource) {
	benchIdx.Do(func() {
		n := 50_000
		if stress.On() {
			n = 1_000_000
		}
		src := newPowerLaw(n, 32, 2.1, 1)
		dir, err := os.MkdirTemp("", "hopwise-bench")
		if err != nil {
			benchIdx.err = err
			return
		}
		path := filepath.Join(dir, "bench.hwx")
		if err := graphidx.WriteFile(path, src); err != nil {
			benchIdx.err = err
			return
		}
		benchIdx.ix, benchIdx.err = graphidx.Open(path)
		benchIdx.src = src
		os.RemoveAll(dir) // the mapping stays valid on unix
	})
	if benchIdx.err != nil {
		b.Fatal(benchIdx.err)
	}
	return benchIdx.ix, benchIdx.src
}

// nonClosing keeps the shared benchmark index open when a router retires it.
type nonClosing struct{ Graph }

func benchQueries(src *powerLawSource, n int, seed uint64) []Query {
	rng := rand.New(rand.NewPCG(seed, 5))
	qs := make([]Query, 0, n)
	for len(qs) < n {
		a, c := rng.IntN(len(src.Entities())), rng.IntN(len(src.Entities()))
		if a == c {
			continue
		}
		qs = append(qs, Query{From: src.Entities()[a].Name, Value: "on", To: src.Entities()[c].Name, Key: strconv.Itoa(len(qs))})
	}
	return qs
}

func BenchmarkDecideCached(b *testing.B) {
	ix, src := benchIndex(b)
	r, err := New(nonClosing{ix})
	if err != nil {
		b.Fatal(err)
	}
	q := benchQueries(src, 1, 3)[0]
	ctx := context.Background()
	if _, err := r.Decide(ctx, q); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	var d Decision
	for b.Loop() {
		d, err = r.Decide(ctx, q)
	}
	if err != nil || !d.Cached || len(d.Values) != 2 {
		b.Fatalf("cached decision %+v %v", d, err)
	}
}

func BenchmarkDecideCachedParallel(b *testing.B) {
	ix, src := benchIndex(b)
	r, err := New(nonClosing{ix})
	if err != nil {
		b.Fatal(err)
	}
	qs := benchQueries(src, 256, 4)
	ctx := context.Background()
	for _, q := range qs {
		if _, err := r.Decide(ctx, q); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportAllocs()
	b.ResetTimer()
	b.RunParallel(func(pb *testing.PB) {
		i := 0
		for pb.Next() {
			d, err := r.Decide(ctx, qs[i&255])
			if err != nil || !d.Cached {
				b.Errorf("%+v %v", d, err)
				return
			}
			i++
		}
	})
}

func benchUncached(b *testing.B, opts ...Option) {
	ix, _ := benchIndex(b)
	benchUncachedOn(b, wrapIndex(ix), opts...)
}

func benchUncachedOn(b *testing.B, g Graph, opts ...Option) {
	_, src := benchIndex(b)
	r, err := New(g, append([]Option{WithCacheSize(0)}, opts...)...)
	if err != nil {
		b.Fatal(err)
	}
	qs := benchQueries(src, 4096, 5)
	ctx := context.Background()
	b.ReportAllocs()
	i, chains, trunc := 0, 0, 0
	for b.Loop() {
		d, err := r.Decide(ctx, qs[i%len(qs)])
		if err != nil {
			b.Fatal(err)
		}
		if d.Chain != nil {
			chains++
		}
		if d.Truncated {
			trunc++
		}
		i++
	}
	if chains == 0 {
		b.Fatal("no chain found in any decision")
	}
	b.ReportMetric(float64(chains)/float64(i), "chain-found/op")
	b.ReportMetric(float64(trunc)/float64(i), "truncated/op")
}

func BenchmarkDecideUncached(b *testing.B) { benchUncached(b) }

// BenchmarkDecideUncachedOneByOne is BenchmarkDecideUncached on a graph
// that hides the index's optional methods (PairBatch, RankPrefix): every
// pair is read with its own Pair call, as before the batch prefetch (the
// per-decision pair memo stays). Same decisions (TestDecideGoldenDigest).
func BenchmarkDecideUncachedOneByOne(b *testing.B) {
	ix, _ := benchIndex(b)
	benchUncachedOn(b, nonClosing{ix})
}

func BenchmarkDecideUncachedH1(b *testing.B) { benchUncached(b, WithMaxBridges(1)) }

// BenchmarkDecideHub routes from the highest-weight entity (the largest
// hub) to random entities.
func BenchmarkDecideHub(b *testing.B) {
	ix, src := benchIndex(b)
	r, err := New(wrapIndex(ix), WithCacheSize(0))
	if err != nil {
		b.Fatal(err)
	}
	qs := benchQueries(src, 1024, 6)
	for i := range qs {
		qs[i].From = src.Entities()[0].Name
		if qs[i].To == qs[i].From {
			qs[i].To = src.Entities()[1].Name
		}
	}
	b.ReportMetric(float64(ix.Degree(0)), "hub-degree")
	ctx := context.Background()
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		if _, err := r.Decide(ctx, qs[i%len(qs)]); err != nil {
			b.Fatal(err)
		}
		i++
	}
}

// BenchmarkDecideCachedArms is the cached path with A/B arms and
// exploration: two SipHash draws per decision on top of the cache hit.
func BenchmarkDecideCachedArms(b *testing.B) {
	ix, src := benchIndex(b)
	r, err := New(nonClosing{ix},
		WithArms(ArmWeight{ArmRouted, 0.8}, ArmWeight{ArmDirectOnly, 0.1}, ArmWeight{ArmChainAlways, 0.1}),
		WithExploration(0.05, "bench"))
	if err != nil {
		b.Fatal(err)
	}
	q := benchQueries(src, 1, 3)[0]
	q.Key = "grower-000042"
	ctx := context.Background()
	if _, err := r.Decide(ctx, q); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	var d Decision
	for b.Loop() {
		d, err = r.Decide(ctx, q)
	}
	if err != nil || !d.Cached || d.Arm == "" {
		b.Fatalf("cached decision %+v %v", d, err)
	}
}

// TestLatencyProfile prints uncached Decide latency percentiles on the
// power-law index (1M entities). It only runs with HOPWISE_STRESS=1;
// wall-clock figures depend on machine load.
func TestLatencyProfile(t *testing.T) {
	stress.Require(t, "router latency profile on a 1M-entity index")
	ix, src := benchIndex(&testing.B{})
	qs := benchQueries(src, 20000, 5)
	hubQs := benchQueries(src, 2000, 6)
	for i := range hubQs {
		hubQs[i].From = src.Entities()[0].Name
		if hubQs[i].To == hubQs[i].From {
			hubQs[i].To = src.Entities()[1].Name
		}
	}
	ctx := context.Background()
	run := func(name string, r *Router, qs []Query) {
		for _, q := range qs[:len(qs)/10] { // warm the pool and page cache
			r.Decide(ctx, q)
		}
		lat := make([]time.Duration, 0, len(qs))
		found, trunc := 0, 0
		for _, q := range qs {
			start := time.Now()
			d, err := r.Decide(ctx, q)
			lat = append(lat, time.Since(start))
			if err != nil {
				t.Fatal(err)
			}
			if d.Chain != nil {
				found++
			}
			if d.Truncated {
				trunc++
			}
		}
		slices.Sort(lat)
		t.Logf("%-10s n=%d p50 %v p90 %v p99 %v max %v chain-found %.3f truncated %.3f", name, len(qs),
			lat[len(lat)/2], lat[len(lat)*9/10], lat[len(lat)*99/100], lat[len(lat)-1],
			float64(found)/float64(len(qs)), float64(trunc)/float64(len(qs)))
	}
	t.Logf("index: %d entities, %d pairs, hub degree %d", ix.NumEntities(), ix.NumPairs(), ix.Degree(0))
	for _, h := range []int{1, 2, 3} {
		r, err := New(wrapIndex(ix), WithCacheSize(0), WithMaxBridges(h))
		if err != nil {
			t.Fatal(err)
		}
		run(fmt.Sprintf("H=%d", h), r, qs)
	}
	r, _ := New(wrapIndex(ix), WithCacheSize(0))
	run("hub H=3", r, hubQs)
}
