package graphidx

import (
	"fmt"
	"testing"
)

// TestPairKsCheckedEqualsLazy: on an index checked at open, Pair and
// PairBatch take K_a = K_b = maxK from a table of maxK² entries (view.tables)
// instead of reading the entities' value sets; every stored pair, and
// every pair of a sample of absent ones, must read exactly as on the same
// file opened WithLazyVerify (which reads them), with mixed K (1..4).
func TestPairKsCheckedEqualsLazy(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		n, deg, k int
		seed      uint64
	}{{300, 8, 0, 1}, {300, 8, 0, 2}, {200, 12, 0, 3}} {
		t.Run(fmt.Sprintf("n%d-k%d-seed%d", tc.n, tc.k, tc.seed), func(t *testing.T) {
			t.Parallel()
			src := ixRandomSource(tc.n, tc.deg, tc.k, tc.seed)
			path := ixWriteTemp(t, src)
			full, lazy := ixOpen(t, path), ixOpen(t, path, WithLazyVerify())
			if !full.v.Load().checked || lazy.v.Load().checked {
				t.Fatal("the full open must be checked, the lazy one not")
			}
			var a, b []EntityID
			for i := range tc.n {
				for j := range tc.n {
					if i != j && (j%5 == 0 || len(a)%3 == 0) {
						a, b = append(a, EntityID(i)), append(b, EntityID(j))
					}
				}
			}
			out := make([]PairStats, len(a))
			ok := make([]bool, len(a))
			full.PairBatch(a, b, out, ok)
			found, maxKPairs := 0, 0
			for i := range a {
				p1, ok1 := full.Pair(a[i], b[i])
				p2, ok2 := lazy.Pair(a[i], b[i])
				if ok1 != ok2 || ok[i] != ok2 || (ok1 && (!ixSamePair(p1, p2) || !ixSamePair(out[i], p2))) {
					t.Fatalf("pair (%d, %d): checked %v %+v, batch %v %+v, lazy %v %+v", a[i], b[i], ok1, p1, ok[i], out[i], ok2, p2)
				}
				if ok1 {
					found++
					if p1.KA == full.v.Load().maxK && p1.KB == p1.KA {
						maxKPairs++
					}
				}
			}
			if found == 0 || maxKPairs == 0 || maxKPairs == found {
				t.Fatalf("%d stored pairs drawn, %d of them of two max-K entities: the test needs both kinds", found, maxKPairs)
			}
		})
	}
}

// TestPairBatchRankedEqualsPair: PairBatchRanked answers every pair as Pair
// does, checked at open (trusted stored positions) or not (checked
// positions): pairs named by their ranked entry, by a wrong entry, by an
// entry out of range, without one (NoPairHint), and absent pairs, mixed in
// batches wider than pairBatchWidth.
func TestPairBatchRankedEqualsPair(t *testing.T) {
	t.Parallel()
	path := ixWriteTemp(t, ixRandomSource(400, 10, 0, 5), WithRankPrefix(6))
	for _, lazy := range []bool{false, true} {
		var opts []OpenOption
		if lazy {
			opts = append(opts, WithLazyVerify())
		}
		x := ixOpen(t, path, opts...)
		var a, b []EntityID
		var entry []uint32
		kinds := [5]int{}
		for id := range EntityID(400) {
			rk := x.RankedNeighbors(id)
			for j, nb := range rk {
				kind := (int(id) + j) % 5
				kinds[kind]++
				e, other := uint32(j), nb
				switch kind {
				case 1: // a wrong entry: another ranked neighbour's
					e = uint32((j + 1) % len(rk))
				case 2: // out of range
					e = uint32(len(rk) + j)
				case 3:
					e = NoPairHint
				case 4: // an absent pair (or a stored one) with the entry of nb
					other = (nb + 7) % 400
				}
				a, b, entry = append(a, id), append(b, other), append(entry, e)
			}
		}
		out := make([]PairStats, len(a))
		ok := make([]bool, len(a))
		x.PairBatchRanked(a, b, entry, out, ok)
		for i := range a {
			p, pok := x.Pair(a[i], b[i])
			if pok != ok[i] || (pok && !ixSamePair(p, out[i])) {
				t.Fatalf("lazy %v: pair (%d, %d) entry %d: batch %v %+v, Pair %v %+v", lazy, a[i], b[i], entry[i], ok[i], out[i], pok, p)
			}
		}
		if kinds[0] < 100 || len(a) <= pairBatchWidth {
			t.Fatalf("%d pairs, kinds %v: too few", len(a), kinds)
		}
	}
}
