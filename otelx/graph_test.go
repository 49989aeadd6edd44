package otelx

import (
	"fmt"
	"math/rand/v2"
	"slices"

	"github.com/hopwise/hopwise/graphidx"
)

// memGraph is a small in-memory router.Graph for the tests of this
// package (the real index lives in graphidx).
type memGraph struct {
	names  []string
	index  map[string]graphidx.EntityID
	values [][]string
	adj    [][]graphidx.EntityID
	ranked [][]graphidx.EntityID
	pairs  map[[2]graphidx.EntityID]graphidx.PairStats
	gen    uint64
}

func newMemGraph(gen uint64) *memGraph {
	return &memGraph{index: map[string]graphidx.EntityID{}, pairs: map[[2]graphidx.EntityID]graphidx.PairStats{}, gen: gen}
}

func (g *memGraph) entity(name string, values ...string) graphidx.EntityID {
	id := graphidx.EntityID(len(g.names))
	g.names = append(g.names, name)
	g.index[name] = id
	vs := slices.Clone(values)
	slices.Sort(vs)
	g.values = append(g.values, vs)
	return id
}

// pair stores the K_a×K_b table of (a, b) and its transpose.
func (g *memGraph) pair(a, b graphidx.EntityID, counts ...uint32) {
	ka, kb := len(g.values[a]), len(g.values[b])
	if len(counts) != ka*kb {
		panic(fmt.Sprintf("pair %d,%d: %d counts", a, b, len(counts)))
	}
	g.pairs[[2]graphidx.EntityID{a, b}] = graphidx.NewPairStats(a, b, ka, kb, counts)
	t := make([]uint32, len(counts))
	for u := range ka {
		for v := range kb {
			t[v*ka+u] = counts[u*kb+v]
		}
	}
	g.pairs[[2]graphidx.EntityID{b, a}] = graphidx.NewPairStats(b, a, kb, ka, t)
}

func (g *memGraph) finish() *memGraph {
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
		slices.SortStableFunc(r, func(x, y graphidx.EntityID) int {
			sx, sy := g.pairs[[2]graphidx.EntityID{a, x}].Support(), g.pairs[[2]graphidx.EntityID{a, y}].Support()
			switch {
			case sx > sy:
				return -1
			case sx < sy:
				return 1
			}
			return int(x) - int(y)
		})
		g.ranked[i] = r
	}
	return g
}

func (g *memGraph) NumValues(id graphidx.EntityID) int {
	if int(id) >= len(g.values) {
		return 0
	}
	return len(g.values[id])
}

func (g *memGraph) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	ps, ok := g.pairs[[2]graphidx.EntityID{a, b}]
	return ps, ok
}

func (g *memGraph) Lookup(name string) (graphidx.EntityID, bool) {
	id, ok := g.index[name]
	return id, ok
}

func (g *memGraph) Name(id graphidx.EntityID) string     { return g.names[id] }
func (g *memGraph) Values(id graphidx.EntityID) []string { return g.values[id] }
func (g *memGraph) ValueIndex(id graphidx.EntityID, label string) (int, bool) {
	i := slices.Index(g.values[id], label)
	return i, i >= 0
}
func (g *memGraph) Neighbors(id graphidx.EntityID) []graphidx.EntityID       { return g.adj[id] }
func (g *memGraph) RankedNeighbors(id graphidx.EntityID) []graphidx.EntityID { return g.ranked[id] }
func (g *memGraph) NumEntities() int                                         { return len(g.names) }
func (g *memGraph) Generation() uint64                                       { return g.gen }

// greenhouseGraph: a north vent drives zone-1 humidity, which drives the
// tomato bed; the vent and the bed are never observed together, and a pump
// links them only weakly.
func greenhouseGraph() *memGraph {
	g := newMemGraph(0xfeed)
	bed := g.entity("bed-tomato", "dry", "wet")
	hum := g.entity("humidity-zone1", "high", "low")
	pump := g.entity("pump-2", "off", "on")
	vent := g.entity("vent-north", "closed", "open")
	sensor := g.entity("sensor-9", "ok", "fault")
	g.pair(vent, hum, 90, 10, 12, 88)
	g.pair(hum, bed, 8, 92, 85, 15)
	g.pair(vent, pump, 2, 1, 1, 2)
	g.pair(pump, bed, 1, 2, 2, 1)
	g.pair(sensor, bed, 300, 310, 2, 3)
	g.pair(sensor, hum, 280, 330, 3, 2)
	return g.finish()
}

// randomGraph: n crop beds with 2–3 values, each pair linked with
// probability p, random count tables (seeded).
func randomGraph(seed uint64, n int, p float64) *memGraph {
	rng := rand.New(rand.NewPCG(seed, 0x5eed))
	g := newMemGraph(seed)
	labels := []string{"dry", "moist", "wet"}
	for i := range n {
		g.entity(fmt.Sprintf("bed%03d", i), labels[:2+rng.IntN(2)]...)
	}
	for i := range n {
		for j := i + 1; j < n; j++ {
			if rng.Float64() >= p {
				continue
			}
			ki, kj := len(g.values[i]), len(g.values[j])
			c := make([]uint32, ki*kj)
			scale := 1 + rng.IntN(60)
			for x := range c {
				c[x] = uint32(rng.IntN(scale + 1))
			}
			c[rng.IntN(len(c))]++
			g.pair(graphidx.EntityID(i), graphidx.EntityID(j), c...)
		}
	}
	return g.finish()
}
