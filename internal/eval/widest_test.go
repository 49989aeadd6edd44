package eval

import (
	"slices"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// benchOf builds a Bench whose index adjacency is the given undirected
// weighted edges (supports).
func benchOf(n int, edges [][3]uint64) *Bench {
	b := &Bench{adj: make([][]nb, n)}
	for _, e := range edges {
		a, c := graphidx.EntityID(e[0]), graphidx.EntityID(e[1])
		b.adj[a] = append(b.adj[a], nb{c, e[2]})
		b.adj[c] = append(b.adj[c], nb{a, e[2]})
	}
	for i := range b.adj {
		slices.SortFunc(b.adj[i], func(x, y nb) int { return int(x.id) - int(y.id) })
	}
	return b
}

func TestWidestChain(t *testing.T) {
	t.Parallel()
	// s = 0, t = 4. Hand-checked bottlenecks: via 1 → min(100, 50) = 50;
	// via 2, 3 → min(80, 90, 70) = 70; the direct edge 0–4 is not a chain.
	base := [][3]uint64{{0, 1, 100}, {1, 4, 50}, {0, 2, 80}, {2, 3, 90}, {3, 4, 70}, {0, 4, 1000}}
	cases := []struct {
		name   string
		edges  [][3]uint64
		h      int
		fewest bool
		want   []graphidx.EntityID
	}{
		{"one bridge", base, 1, false, []graphidx.EntityID{1}},
		{"two bridges win", base, 3, false, []graphidx.EntityID{2, 3}},
		{"fewest bridges first", base, 3, true, []graphidx.EntityID{1}},
		{"tie goes to fewer bridges", append(slices.Clone(base), [3]uint64{0, 5, 70}, [3]uint64{5, 4, 75}), 3, false, []graphidx.EntityID{5}},
		{"fewest, then widest", append(slices.Clone(base), [3]uint64{0, 5, 70}, [3]uint64{5, 4, 75}), 3, true, []graphidx.EntityID{5}},
		{"no chain", [][3]uint64{{0, 4, 10}, {0, 1, 5}}, 3, false, nil},
		{"H = 0", base, 0, false, nil},
		// A path may not revisit s: 0–1–0–… is never taken.
		{"simple paths only", [][3]uint64{{0, 1, 100}, {1, 2, 100}, {2, 4, 100}, {0, 3, 1}, {3, 4, 1}}, 3, false, []graphidx.EntityID{1, 2}},
	}
	for _, c := range cases {
		b := benchOf(6, c.edges)
		if got := b.widestChain(0, 4, c.h, c.fewest); !slices.Equal(got, c.want) {
			t.Errorf("%s: widestChain = %v, want %v", c.name, got, c.want)
		}
	}
}
