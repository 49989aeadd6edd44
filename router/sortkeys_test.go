package router

import (
	"math/rand/v2"
	"slices"
	"testing"
)

// TestSortKeysMatchesSort checks the radix path of sortKeys against
// slices.Sort on keys id<<32|i (ids random, repeated, sharing bytes), over
// reused buffers as the search reuses them.
func TestSortKeysMatchesSort(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(3, 5))
	sc := newScratch()
	for trial := 0; trial < 3000; trial++ {
		n := rng.IntN(130)
		span := []uint32{1, 7, 256, 1 << 16, 1 << 24, 1<<32 - 1}[rng.IntN(6)]
		keys := sc.keys[:0]
		for i := 0; i < n; i++ {
			keys = append(keys, uint64(rng.Uint32N(span)+uint32(trial&3)<<8)<<32|uint64(i))
		}
		want := slices.Clone(keys)
		slices.Sort(want)
		got := sc.sortKeys(keys)
		if !slices.Equal(got, want) {
			t.Fatalf("trial %d (n=%d span=%d): got %x, want %x", trial, n, span, got, want)
		}
		sc.keys = got
		if n > 0 && cap(sc.keyTmp) > 0 && &sc.keyTmp[:1][0] == &sc.keys[:1][0] {
			t.Fatalf("trial %d: sort buffers alias", trial)
		}
	}
}
