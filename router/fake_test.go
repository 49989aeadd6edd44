package router

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"sort"
	"sync/atomic"

	"github.com/hopwise/hopwise/graphidx"
)

// memGraph is an in-memory Graph for tests. After Close every lookup panics,
// so a use-after-retire in the router crashes the test.
type memGraph struct {
	names  []string
	index  map[string]graphidx.EntityID
	values [][]string
	adj    [][]graphidx.EntityID
	ranked [][]graphidx.EntityID
	pairs  map[[2]graphidx.EntityID]graphidx.PairStats
	gen    uint64
	prefix int // ranked prefix length limit (0: full)

	closes atomic.Int32
}

// hookGraph calls onPair with the running count of its Pair calls.
type hookGraph struct {
	*memGraph
	n      atomic.Int64
	onPair func(n int64)
}

func (h *hookGraph) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	h.onPair(h.n.Add(1))
	return h.memGraph.Pair(a, b)
}

type memBuilder struct {
	g      *memGraph
	tables map[[2]graphidx.EntityID][]uint32 // (lo, hi) orientation
}

func newMemBuilder(gen uint64) *memBuilder {
	return &memBuilder{
		g:      &memGraph{index: map[string]graphidx.EntityID{}, pairs: map[[2]graphidx.EntityID]graphidx.PairStats{}, gen: gen},
		tables: map[[2]graphidx.EntityID][]uint32{},
	}
}

// entity adds an entity; names must be added in ascending order for ids to
// follow name order (not required by the router).
func (b *memBuilder) entity(name string, values ...string) graphidx.EntityID {
	id := graphidx.EntityID(len(b.g.names))
	b.g.names = append(b.g.names, name)
	b.g.index[name] = id
	vs := slices.Clone(values)
	sort.Strings(vs)
	b.g.values = append(b.g.values, vs)
	return id
}

// pair sets the count table of (a, b) in the orientation (a, b), row-major
// K_a × K_b.
func (b *memBuilder) pair(a, c graphidx.EntityID, counts ...uint32) {
	ka, kc := len(b.g.values[a]), len(b.g.values[c])
	if len(counts) != ka*kc {
		panic(fmt.Sprintf("pair %d,%d: %d counts for %dx%d", a, c, len(counts), ka, kc))
	}
	b.g.pairs[[2]graphidx.EntityID{a, c}] = graphidx.NewPairStats(a, c, ka, kc, counts)
	t := make([]uint32, len(counts))
	for u := 0; u < ka; u++ {
		for v := 0; v < kc; v++ {
			t[v*ka+u] = counts[u*kc+v]
		}
	}
	b.g.pairs[[2]graphidx.EntityID{c, a}] = graphidx.NewPairStats(c, a, kc, ka, t)
}

func (b *memBuilder) build() *memGraph {
	g := b.g
	n := len(g.names)
	g.adj = make([][]graphidx.EntityID, n)
	for k := range g.pairs {
		g.adj[k[0]] = append(g.adj[k[0]], k[1])
	}
	g.ranked = make([][]graphidx.EntityID, n)
	for i := range g.adj {
		slices.Sort(g.adj[i])
		r := slices.Clone(g.adj[i])
		a := graphidx.EntityID(i)
		sort.SliceStable(r, func(x, y int) bool {
			sx, sy := g.pairs[[2]graphidx.EntityID{a, r[x]}].Support(), g.pairs[[2]graphidx.EntityID{a, r[y]}].Support()
			if sx != sy {
				return sx > sy
			}
			return r[x] < r[y]
		})
		g.ranked[i] = r
	}
	return g
}

func (g *memGraph) live() {
	if g.closes.Load() != 0 {
		panic("memGraph used after Close")
	}
}

func (g *memGraph) NumValues(id graphidx.EntityID) int {
	g.live()
	if int(id) >= len(g.values) {
		return 0
	}
	return len(g.values[id])
}

func (g *memGraph) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	g.live()
	ps, ok := g.pairs[[2]graphidx.EntityID{a, b}]
	return ps, ok
}

func (g *memGraph) Lookup(name string) (graphidx.EntityID, bool) {
	g.live()
	id, ok := g.index[name]
	return id, ok
}

func (g *memGraph) Name(id graphidx.EntityID) string { g.live(); return g.names[id] }

func (g *memGraph) Values(id graphidx.EntityID) []string { g.live(); return g.values[id] }

func (g *memGraph) ValueIndex(id graphidx.EntityID, label string) (int, bool) {
	g.live()
	for i, v := range g.values[id] {
		if v == label {
			return i, true
		}
	}
	return 0, false
}

func (g *memGraph) Neighbors(id graphidx.EntityID) []graphidx.EntityID { g.live(); return g.adj[id] }

func (g *memGraph) RankedNeighbors(id graphidx.EntityID) []graphidx.EntityID {
	g.live()
	r := g.ranked[id]
	if g.prefix > 0 && len(r) > g.prefix {
		return r[:g.prefix]
	}
	return r
}

func (g *memGraph) NumEntities() int   { return len(g.names) }
func (g *memGraph) Generation() uint64 { return g.gen }

func (g *memGraph) Close() error {
	g.closes.Add(1)
	return nil
}

// randomGraph builds a seeded random graph of n entities with 2 or 3 values
// each, every pair linked with probability p, with random count tables.
func randomGraph(seed uint64, n int, p float64) *memGraph {
	rng := rand.New(rand.NewPCG(seed, 0x5eed))
	b := newMemBuilder(seed)
	labels := []string{"dry", "moist", "wet"}
	for i := 0; i < n; i++ {
		k := 2 + rng.IntN(2)
		b.entity(fmt.Sprintf("bed%02d", i), labels[:k]...)
	}
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			if rng.Float64() >= p {
				continue
			}
			ki, kj := len(b.g.values[i]), len(b.g.values[j])
			c := make([]uint32, ki*kj)
			scale := 1 + rng.IntN(60)
			for x := range c {
				c[x] = uint32(rng.IntN(scale + 1))
			}
			c[rng.IntN(len(c))]++ // support ≥ 1
			b.pair(graphidx.EntityID(i), graphidx.EntityID(j), c...)
		}
	}
	return b.build()
}

// greenhouse is a small hand-made graph: a vent drives a zone's humidity,
// which drives a crop bed's moisture; the vent and the bed are never observed
// together, the pump links to both weakly.
func greenhouse(gen uint64) *memGraph {
	b := newMemBuilder(gen)
	bed := b.entity("bed-tomato", "dry", "wet")
	hum := b.entity("humidity-zone1", "high", "low")
	pump := b.entity("pump-2", "off", "on")
	vent := b.entity("vent-north", "closed", "open")
	// vent → humidity: open vents mostly give low humidity (rows vent, cols humidity high/low)
	b.pair(vent, hum, 90, 10, 12, 88)
	// humidity → bed: high humidity mostly wet beds (rows humidity high/low, cols bed dry/wet)
	b.pair(hum, bed, 8, 92, 85, 15)
	// weak links through the pump
	b.pair(vent, pump, 2, 1, 1, 2)
	b.pair(pump, bed, 1, 2, 2, 1)
	return b.build()
}

// bedStar is sensor-a (dry/wet) and vent-b (closed/open), never observed
// together, with leaves crop beds each adjacent to both with varied counts:
// as many one-bridge chains as leaves.
func bedStar(leaves int) *memGraph {
	b := newMemBuilder(1)
	s := b.entity("sensor-a", "dry", "wet")
	tt := b.entity("vent-b", "closed", "open")
	for i := range leaves {
		z := b.entity(fmt.Sprintf("bed-%05d", i), "low", "high")
		n := uint32(5 + i%37)
		b.pair(s, z, 3*n, n, n, 2*n)
		b.pair(z, tt, 2*n, n+uint32(i%5), n, 3*n)
	}
	return b.build()
}
