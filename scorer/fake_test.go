package scorer_test

import (
	"github.com/hopwise/hopwise/graphidx"
)

// memStats is a tiny in-memory scorer.Stats for tests: entity value counts
// and pair tables, stored in both orientations.
type memStats struct {
	k     map[graphidx.EntityID]int
	pairs map[[2]graphidx.EntityID]graphidx.PairStats
}

func newMemStats() *memStats {
	return &memStats{k: map[graphidx.EntityID]int{}, pairs: map[[2]graphidx.EntityID]graphidx.PairStats{}}
}

// entity declares id with k values.
func (m *memStats) entity(id graphidx.EntityID, k int) *memStats {
	m.k[id] = k
	return m
}

// pair stores the table rows[u][v] = contexts with a=u, b=v, and its
// transpose for (b, a). Both entities must have been declared.
func (m *memStats) pair(a, b graphidx.EntityID, rows [][]uint32) *memStats {
	ka, kb := m.k[a], m.k[b]
	if len(rows) != ka {
		panic("memStats: row count does not match K of a")
	}
	fwd := make([]uint32, ka*kb)
	rev := make([]uint32, ka*kb)
	for u, row := range rows {
		if len(row) != kb {
			panic("memStats: row length does not match K of b")
		}
		for v, c := range row {
			fwd[u*kb+v] = c
			rev[v*ka+u] = c
		}
	}
	m.pairs[[2]graphidx.EntityID{a, b}] = graphidx.NewPairStats(a, b, ka, kb, fwd)
	m.pairs[[2]graphidx.EntityID{b, a}] = graphidx.NewPairStats(b, a, kb, ka, rev)
	return m
}

func (m *memStats) NumValues(id graphidx.EntityID) int { return m.k[id] }

func (m *memStats) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	ps, ok := m.pairs[[2]graphidx.EntityID{a, b}]
	return ps, ok
}
