package graphidx

import (
	"slices"
	"testing"
	"unsafe"
)

// inMapping reports whether the first element of s lies in x's file
// mapping.
func inMapping[E any](x *Index, s []E) bool {
	if len(s) == 0 || len(x.mapped) == 0 {
		return false
	}
	p := uintptr(unsafe.Pointer(&s[0]))
	m := uintptr(unsafe.Pointer(&x.mapped[0]))
	return p >= m && p < m+uintptr(len(x.mapped))
}

// TestHotCopy: a checked, mapped index at least as large as the threshold
// reads its hot sections from a private copy, and answers every read as
// the same file opened WithoutHotCopy (and lazily, which never copies);
// Verify passes on the copy; Close releases it once.
func TestHotCopy(t *testing.T) {
	t.Parallel()
	for _, k := range []int{0, 3} { // mixed K (marginal offsets) and uniform K
		path := ixWriteTemp(t, ixRandomSource(90, 7, k, 23))
		a := ixOpen(t, path, withHotCopyMin(1))
		b := ixOpen(t, path, withHotCopyMin(1), WithoutHotCopy())
		lazy := ixOpen(t, path, withHotCopyMin(1), WithLazyVerify())
		small := ixOpen(t, path) // below the default threshold
		va := a.v.Load()
		if !hostLittleEndian || len(a.mapped) == 0 {
			t.Skip("no zero-copy mapping on this platform")
		}
		for name, s := range map[string][]uint64{"name offsets": va.nameOffs, "neighbour offsets": va.nbrOffs, "pair base": va.pairBase, "rank offsets": va.rankOffs, "marginals": va.marg} {
			if inMapping(a, s) {
				t.Fatalf("K=%d: %s still read from the mapping", k, name)
			}
		}
		if len(va.margOffs) > 0 && inMapping(a, va.margOffs) || inMapping(a, va.entVSet) {
			t.Fatalf("K=%d: marginal offsets or value sets still read from the mapping", k)
		}
		for _, x := range []*Index{b, lazy, small} {
			if v := x.v.Load(); !inMapping(x, v.nbrOffs) || !inMapping(x, v.marg) {
				t.Fatalf("K=%d: an index that should not be copied was", k)
			}
		}
		n := a.NumEntities()
		for _, x := range []*Index{b, lazy} {
			for i := range n {
				id := EntityID(i)
				if a.Name(id) != x.Name(id) || a.NumValues(id) != x.NumValues(id) ||
					!slices.Equal(a.Neighbors(id), x.Neighbors(id)) || !slices.Equal(a.RankedNeighbors(id), x.RankedNeighbors(id)) ||
					!slices.Equal(a.Marginal(id), x.Marginal(id)) || !slices.Equal(a.RankedPairHints(id), x.RankedPairHints(id)) {
					t.Fatalf("K=%d: entity %d differs", k, i)
				}
				if got, ok := a.Lookup(a.Name(id)); !ok || got != id {
					t.Fatalf("K=%d: Lookup(%q) = %d, %v", k, a.Name(id), got, ok)
				}
				for j := range n {
					pa, oka := a.Pair(id, EntityID(j))
					px, okx := x.Pair(id, EntityID(j))
					if oka != okx || pa.KA != px.KA || pa.KB != px.KB || pa.Support() != px.Support() {
						t.Fatalf("K=%d: pair (%d,%d) differs", k, i, j)
					}
					for u := range pa.KA {
						for w := range pa.KB {
							if pa.Count(u, w) != px.Count(u, w) {
								t.Fatalf("K=%d: pair (%d,%d) count (%d,%d) differs", k, i, j, u, w)
							}
						}
					}
				}
			}
		}
		if err := a.Verify(); err != nil {
			t.Fatalf("K=%d: Verify of the copied index: %v", k, err)
		}
		if err := a.Close(); err != nil || a.Close() != nil || a.NumEntities() != 0 {
			t.Fatalf("K=%d: Close: %v, then NumEntities %d", k, err, a.NumEntities())
		}
	}
}
