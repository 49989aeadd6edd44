package scorer_test

import (
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/testgraph"
)

// memStats is internal/testgraph's Stats (shared with the router and otelx
// tests) with the chaining helpers these tests use.
type memStats struct{ *testgraph.Stats }

func newMemStats() *memStats { return &memStats{testgraph.NewStats()} }

// entity declares id with k values.
func (m *memStats) entity(id graphidx.EntityID, k int) *memStats {
	m.SetValues(id, k)
	return m
}

// pair stores the table rows[u][v] = contexts with a=u, b=v, and its
// transpose for (b, a). Both entities must have been declared.
func (m *memStats) pair(a, b graphidx.EntityID, rows [][]uint32) *memStats {
	var flat []uint32
	for _, row := range rows {
		if len(row) != m.NumValues(b) {
			panic("memStats: row length does not match K of b")
		}
		flat = append(flat, row...)
	}
	m.SetPair(a, b, flat) // panics when the row count does not match K of a
	return m
}
