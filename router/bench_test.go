package router

import (
	"context"
	"fmt"
	"math"
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

// powerLawSource is a Chung–Lu random graph (Chung & Lu 2002): entity i has
// weight w_i ∝ (i+1)^(−1/(γ−1)), and M = n·d/2 edge draws pick both
// endpoints proportionally to weight (duplicates and loops dropped), which
// gives a degree distribution with tail exponent γ. Every entity has two
// values; a pair's 2×2 table holds random counts.
type powerLawSource struct {
	n      int
	ctxs   uint64 // every context observes exactly one pair
	ents   []graphidx.EntityRecord
	edges  []uint64 // a<<32 | b, ascending
	counts []uint32 // 4 per edge
}

func (s *powerLawSource) Contexts() uint64                  { return s.ctxs }
func (s *powerLawSource) Entities() []graphidx.EntityRecord { return s.ents }
func (s *powerLawSource) Pairs(fn func(graphidx.PairRecord) error) error {
	for i, e := range s.edges {
		p := graphidx.PairRecord{A: graphidx.EntityID(e >> 32), B: graphidx.EntityID(e & 0xffffffff), Counts: s.counts[4*i : 4*i+4 : 4*i+4]}
		if err := fn(p); err != nil {
			return err
		}
	}
	return nil
}

func newPowerLaw(n int, avgDeg float64, gamma float64, seed uint64) *powerLawSource {
	rng := rand.New(rand.NewPCG(seed, 99))
	cum := make([]float64, n)
	var tot float64
	for i := 0; i < n; i++ {
		tot += math.Pow(float64(i+1), -1/(gamma-1))
		cum[i] = tot
	}
	draw := func() int {
		x := rng.Float64() * tot
		i, _ := slices.BinarySearch(cum, x)
		if i >= n {
			i = n - 1
		}
		return i
	}
	m := int(float64(n) * avgDeg / 2)
	edges := make([]uint64, 0, m)
	for len(edges) < m {
		a, b := draw(), draw()
		if a == b {
			continue
		}
		if a > b {
			a, b = b, a
		}
		edges = append(edges, uint64(a)<<32|uint64(b))
	}
	slices.Sort(edges)
	edges = slices.Compact(edges)
	width := len(strconv.Itoa(n))
	s := &powerLawSource{n: n}
	for i := 0; i < n; i++ {
		// names sorted ascending == ids, by zero padding
		s.ents = append(s.ents, graphidx.EntityRecord{
			Name: fmt.Sprintf("sensor%0*d", width, i), Values: []string{"off", "on"}, Marginal: []uint64{0, 0}})
	}
	s.edges = edges
	s.counts = make([]uint32, 4*len(edges))
	for i, e := range edges {
		a, b := graphidx.EntityID(e>>32), graphidx.EntityID(e&0xffffffff)
		c := s.counts[4*i : 4*i+4]
		scale := 1 + rng.IntN(40)
		for j := range c {
			c[j] = uint32(rng.IntN(scale))
		}
		c[rng.IntN(4)]++
		s.ctxs += uint64(c[0] + c[1] + c[2] + c[3])
		for u := 0; u < 2; u++ {
			s.ents[a].Marginal[u] += uint64(c[u*2] + c[u*2+1])
			s.ents[b].Marginal[u] += uint64(c[u] + c[2+u])
		}
	}
	return s
}

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
		a, c := rng.IntN(src.n), rng.IntN(src.n)
		if a == c {
			continue
		}
		qs = append(qs, Query{From: src.ents[a].Name, Value: "on", To: src.ents[c].Name, Key: strconv.Itoa(len(qs))})
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
		qs[i].From = src.ents[0].Name
		if qs[i].To == qs[i].From {
			qs[i].To = src.ents[1].Name
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
		hubQs[i].From = src.ents[0].Name
		if hubQs[i].To == hubQs[i].From {
			hubQs[i].To = src.ents[1].Name
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
