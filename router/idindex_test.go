package router

import (
	"math/rand/v2"
	"testing"
)

// TestIDFilter checks that the join filter has no false negatives, that a
// reset forgets every id, and that its false positives stay near the
// one-hash Bloom rate 1−(1−1/4096)ⁿ (Bloom 1970) for the beam sizes the
// joins use.
func TestIDFilter(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		name string
		n    int
		seed uint64
	}{{"empty", 0, 1}, {"beam", 64, 2}, {"wide beam", 512, 3}} {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			r := rand.New(rand.NewPCG(tc.seed, 7))
			var f idFilter
			var in map[uint64]bool
			for round := 0; round < 3; round++ {
				f.reset()
				for id := range in {
					if f.has(id) {
						t.Fatalf("round %d: id %d of the last round found after reset", round, id)
					}
				}
				in = make(map[uint64]bool, tc.n)
				for len(in) < tc.n {
					id := uint64(r.Uint32())
					in[id] = true
					f.add(id)
				}
				for id := range in {
					if !f.has(id) {
						t.Fatalf("round %d: id %d added but not found", round, id)
					}
				}
				const probes = 100000
				fp := 0
				for i := 0; i < probes; i++ {
					id := uint64(r.Uint32())
					if !in[id] && f.has(id) {
						fp++
					}
				}
				// Expected rate ≤ n/4096; allow twice that plus a small
				// absolute slack for the sampling error.
				if limit := 2*float64(tc.n)/4096 + 0.002; float64(fp)/probes > limit {
					t.Fatalf("round %d: false-positive rate %.4f > %.4f for %d ids", round, float64(fp)/probes, limit, tc.n)
				}
			}
		})
	}
}
