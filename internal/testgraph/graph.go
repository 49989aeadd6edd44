package testgraph

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"sync/atomic"

	"github.com/hopwise/hopwise/graphidx"
)

// Stats holds the number of values of each entity and the count table of
// each pair, in both orientations. It satisfies scorer.Stats.
type Stats struct {
	k     map[graphidx.EntityID]int
	pairs map[[2]graphidx.EntityID]graphidx.PairStats
}

// NewStats returns empty Stats.
func NewStats() *Stats {
	return &Stats{k: map[graphidx.EntityID]int{}, pairs: map[[2]graphidx.EntityID]graphidx.PairStats{}}
}

// SetValues declares that entity id has k values.
func (s *Stats) SetValues(id graphidx.EntityID, k int) { s.k[id] = k }

// SetPair stores the table of (a, b), row-major K_a × K_b (counts[u·K_b+v]
// contexts with a = u and b = v), and its transpose for (b, a). Both
// entities must have been declared; a table of the wrong size panics.
func (s *Stats) SetPair(a, b graphidx.EntityID, counts []uint32) {
	ka, kb := s.k[a], s.k[b]
	if len(counts) != ka*kb {
		panic(fmt.Sprintf("testgraph: pair %d,%d: %d counts for %d×%d", a, b, len(counts), ka, kb))
	}
	t := make([]uint32, len(counts))
	for u := range ka {
		for v := range kb {
			t[v*ka+u] = counts[u*kb+v]
		}
	}
	s.pairs[[2]graphidx.EntityID{a, b}] = graphidx.NewPairStats(a, b, ka, kb, slices.Clone(counts))
	s.pairs[[2]graphidx.EntityID{b, a}] = graphidx.NewPairStats(b, a, kb, ka, t)
}

// NumValues returns the number of values of id (0 if undeclared).
func (s *Stats) NumValues(id graphidx.EntityID) int { return s.k[id] }

// Pair returns the table of (a, b) in that orientation.
func (s *Stats) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	ps, ok := s.pairs[[2]graphidx.EntityID{a, b}]
	return ps, ok
}

// Graph is an in-memory router.Graph. After Close every lookup panics.
type Graph struct {
	stats  *Stats
	names  []string
	index  map[string]graphidx.EntityID
	values [][]string
	adj    [][]graphidx.EntityID
	ranked [][]graphidx.EntityID
	gen    uint64
	prefix int // ranked prefix length limit (0: full)

	closes atomic.Int32
}

// Builder adds entities and pairs to a Graph.
type Builder struct{ g *Graph }

// NewBuilder starts a graph of generation gen.
func NewBuilder(gen uint64) *Builder {
	return &Builder{g: &Graph{stats: NewStats(), index: map[string]graphidx.EntityID{}, gen: gen}}
}

// Entity adds an entity with the given values (sorted, as an index sorts
// them) and returns its id, the number of entities added before it. Add
// names in ascending order for ids to follow name order, as in an index.
func (b *Builder) Entity(name string, values ...string) graphidx.EntityID {
	id := graphidx.EntityID(len(b.g.names))
	b.g.names = append(b.g.names, name)
	b.g.index[name] = id
	vs := slices.Clone(values)
	slices.Sort(vs)
	b.g.values = append(b.g.values, vs)
	b.g.stats.SetValues(id, len(vs))
	return id
}

// Pair sets the count table of (a, c), row-major K_a × K_c (see
// Stats.SetPair).
func (b *Builder) Pair(a, c graphidx.EntityID, counts ...uint32) { b.g.stats.SetPair(a, c, counts) }

// Build computes the adjacency lists (ascending ids) and the neighbours
// ranked by support (descending, ties by ascending id) and returns the
// graph.
func (b *Builder) Build() *Graph {
	g := b.g
	n := len(g.names)
	g.adj = make([][]graphidx.EntityID, n)
	for k := range g.stats.pairs {
		g.adj[k[0]] = append(g.adj[k[0]], k[1])
	}
	g.ranked = make([][]graphidx.EntityID, n)
	for i := range g.adj {
		slices.Sort(g.adj[i])
		r := slices.Clone(g.adj[i])
		a := graphidx.EntityID(i)
		slices.SortStableFunc(r, func(x, y graphidx.EntityID) int {
			sx, _ := g.stats.Pair(a, x)
			sy, _ := g.stats.Pair(a, y)
			switch {
			case sx.Support() > sy.Support():
				return -1
			case sx.Support() < sy.Support():
				return 1
			}
			return int(x) - int(y)
		})
		g.ranked[i] = r
	}
	return g
}

func (g *Graph) live() {
	if g.closes.Load() != 0 {
		panic("testgraph: Graph used after Close")
	}
}

// NumValues returns K of id (0 if out of range).
func (g *Graph) NumValues(id graphidx.EntityID) int { g.live(); return g.stats.NumValues(id) }

// Pair returns the table of (a, b) in that orientation.
func (g *Graph) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	g.live()
	return g.stats.Pair(a, b)
}

// Lookup returns the id of name.
func (g *Graph) Lookup(name string) (graphidx.EntityID, bool) {
	g.live()
	id, ok := g.index[name]
	return id, ok
}

// Name returns the name of id.
func (g *Graph) Name(id graphidx.EntityID) string { g.live(); return g.names[id] }

// Values returns the sorted value labels of id.
func (g *Graph) Values(id graphidx.EntityID) []string { g.live(); return g.values[id] }

// ValueIndex returns the index of label among id's values.
func (g *Graph) ValueIndex(id graphidx.EntityID, label string) (int, bool) {
	g.live()
	i := slices.Index(g.values[id], label)
	return i, i >= 0
}

// Neighbors returns id's neighbours in ascending id order.
func (g *Graph) Neighbors(id graphidx.EntityID) []graphidx.EntityID { g.live(); return g.adj[id] }

// RankedNeighbors returns id's neighbours by support, cut to the rank
// prefix set by SetRankPrefix.
func (g *Graph) RankedNeighbors(id graphidx.EntityID) []graphidx.EntityID {
	g.live()
	r := g.ranked[id]
	if g.prefix > 0 && len(r) > g.prefix {
		return r[:g.prefix]
	}
	return r
}

// NumEntities returns the number of entities.
func (g *Graph) NumEntities() int { return len(g.names) }

// Generation returns the generation given to NewBuilder or SetGeneration.
func (g *Graph) Generation() uint64 { return g.gen }

// SetGeneration changes the generation (before the graph is shared).
func (g *Graph) SetGeneration(gen uint64) { g.gen = gen }

// SetRankPrefix cuts RankedNeighbors to n entries (0: no cut), as an index
// stores only a prefix of each ranked list.
func (g *Graph) SetRankPrefix(n int) { g.prefix = n }

// Close marks the graph closed; later lookups panic.
func (g *Graph) Close() error {
	g.closes.Add(1)
	return nil
}

// Closes returns how many times Close was called.
func (g *Graph) Closes() int32 { return g.closes.Load() }

// Random builds a seeded random graph of n entities named
// fmt.Sprintf(nameFormat, i), with 2 or 3 values each (dry, moist, wet),
// every pair linked with probability p and given a random count table of
// support ≥ 1.
func Random(seed uint64, n int, p float64, nameFormat string) *Graph {
	rng := rand.New(rand.NewPCG(seed, 0x5eed))
	b := NewBuilder(seed)
	labels := []string{"dry", "moist", "wet"}
	for i := range n {
		b.Entity(fmt.Sprintf(nameFormat, i), labels[:2+rng.IntN(2)]...)
	}
	for i := range n {
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
			b.Pair(graphidx.EntityID(i), graphidx.EntityID(j), c...)
		}
	}
	return b.Build()
}

// GreenhouseBuilder starts the small hand-made graph most router and otelx
// tests use: a north vent drives zone-1 humidity, which drives the tomato
// bed's moisture; the vent and the bed are never observed together, and
// pump-2 links to both weakly. Ids by name: 0 bed-tomato, 1
// humidity-zone1, 2 pump-2, 3 vent-north. Add more before Build.
func GreenhouseBuilder(gen uint64) *Builder {
	b := NewBuilder(gen)
	bed := b.Entity("bed-tomato", "dry", "wet")
	hum := b.Entity("humidity-zone1", "high", "low")
	pump := b.Entity("pump-2", "off", "on")
	vent := b.Entity("vent-north", "closed", "open")
	// vent → humidity: open vents mostly give low humidity (rows vent, cols humidity high/low)
	b.Pair(vent, hum, 90, 10, 12, 88)
	// humidity → bed: high humidity mostly wet beds (rows humidity high/low, cols bed dry/wet)
	b.Pair(hum, bed, 8, 92, 85, 15)
	// weak links through the pump
	b.Pair(vent, pump, 2, 1, 1, 2)
	b.Pair(pump, bed, 1, 2, 2, 1)
	return b
}
