package router

import (
	"fmt"
	"sync/atomic"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/testgraph"
)

// The in-memory fixtures live in internal/testgraph (shared with the scorer
// and otelx tests); these names keep the router tests short.
type (
	memGraph       = testgraph.Graph
	powerLawSource = testgraph.PowerLaw
)

var newPowerLaw = testgraph.NewPowerLaw

// memBuilder is testgraph.Builder with the lower-case names the router
// tests use.
type memBuilder struct{ b *testgraph.Builder }

func newMemBuilder(gen uint64) *memBuilder { return &memBuilder{testgraph.NewBuilder(gen)} }

// entity adds an entity; names must be added in ascending order for ids to
// follow name order (not required by the router).
func (b *memBuilder) entity(name string, values ...string) graphidx.EntityID {
	return b.b.Entity(name, values...)
}

// pair sets the count table of (a, c) in the orientation (a, c), row-major
// K_a × K_c.
func (b *memBuilder) pair(a, c graphidx.EntityID, counts ...uint32) { b.b.Pair(a, c, counts...) }

func (b *memBuilder) build() *memGraph { return b.b.Build() }

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

// randomGraph builds a seeded random graph of n entities with 2 or 3 values
// each, every pair linked with probability p, with random count tables.
func randomGraph(seed uint64, n int, p float64) *memGraph {
	return testgraph.Random(seed, n, p, "bed%02d")
}

// greenhouse is testgraph's hand-made greenhouse: a vent drives a zone's
// humidity, which drives a crop bed's moisture; the vent and the bed are
// never observed together, the pump links to both weakly.
func greenhouse(gen uint64) *memGraph { return testgraph.GreenhouseBuilder(gen).Build() }

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
