package graphidx

import (
	"slices"
	"testing"
)

// TestPrefetchRankedChangesNothing: the prefetch hints accept any ids (in
// range, out of range, empty lists, many ids, any n) and pair statistics
// (with and without tables), and leave every ranked list, neighbour list,
// value count, marginal and pair answer as it was, on an open and on a
// closed index.
func TestPrefetchRankedChangesNothing(t *testing.T) {
	t.Parallel()
	for _, values := range []int{2, 0} { // one K for all, then K of 1 to 4 (value sets and marginals by entity)
		prefetchChangesNothing(t, values)
	}
}

func prefetchChangesNothing(t *testing.T, values int) {
	x, err := Open(ixWriteTemp(t, ixRandomSource(300, 12, values, 1), WithRankPrefix(8)))
	if err != nil {
		t.Fatal(err)
	}
	if v := x.v.Load(); v.uniform != (values > 0) {
		t.Fatalf("values %d: uniform %v", values, v.uniform)
	}
	n := x.NumEntities()
	ids := []EntityID{0, 1, EntityID(n - 1), EntityID(n), EntityID(n + 1), 1 << 31, ^EntityID(0)}
	for i := range 3 * prefetchChunk { // more than one chunk of addresses
		ids = append(ids, EntityID(i%n))
	}
	type snap struct {
		rk, nb []EntityID
		ok     bool
		counts []uint32 // the pair (id, first neighbour), cell by cell
		k      int
		marg   []uint64
	}
	take := func() []snap {
		var out []snap
		for i := range n {
			id := EntityID(i)
			s := snap{rk: slices.Clone(x.RankedNeighbors(id)), nb: slices.Clone(x.Neighbors(id)),
				k: x.NumValues(id), marg: slices.Clone(x.Marginal(id))}
			if len(s.nb) > 0 {
				var ps PairStats
				ps, s.ok = x.Pair(id, s.nb[0])
				for u := range ps.KA {
					for v := range ps.KB {
						s.counts = append(s.counts, ps.Count(u, v))
					}
				}
			}
			out = append(out, s)
		}
		return out
	}
	before := take()
	var ps []PairStats
	var oks []bool
	for i := range 3 * prefetchChunk {
		p, ok := x.Pair(EntityID(i%n), EntityID((i*7+1)%n))
		ps, oks = append(ps, p), append(oks, ok)
	}
	ps, oks = append(ps, PairStats{}, PairStats{}), append(oks, true, false) // no table
	for _, k := range []int{-1, 0, 1, 3, 8, 1000} {
		x.PrefetchRankedOffsets(ids)
		x.PrefetchRankedHeads(ids, k)
		x.PrefetchRankedOffsets(nil)
		x.PrefetchRankedHeads(nil, k)
		x.PrefetchRankedTables(ids, k)
		x.PrefetchRankedTables(nil, k)
		x.PrefetchRankedCounts(ids, k)
		x.PrefetchRankedCounts(nil, k)
		PrefetchTables(ps, oks)
		PrefetchTables(nil, nil)
		for _, id := range ids {
			x.PrefetchEntity(id, k)
		}
	}
	after := take()
	for i := range before {
		b, a := before[i], after[i]
		if !slices.Equal(b.rk, a.rk) || !slices.Equal(b.nb, a.nb) || b.ok != a.ok || !slices.Equal(b.counts, a.counts) ||
			b.k != a.k || !slices.Equal(b.marg, a.marg) {
			t.Fatalf("entity %d changed after the prefetch hints: %+v, then %+v", i, b, a)
		}
	}
	if err := x.Close(); err != nil {
		t.Fatal(err)
	}
	x.PrefetchRankedOffsets(ids) // a closed index holds nothing to load
	x.PrefetchRankedHeads(ids, 4)
	x.PrefetchEntity(0, 4)
	x.PrefetchRankedTables(ids, 4)
	x.PrefetchRankedCounts(ids, 4)
}
