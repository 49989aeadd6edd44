package reliability

import (
	"cmp"
	"fmt"
	"math/rand/v2"
	"slices"

	"github.com/hopwise/hopwise/graphidx"
)

// memSource is an in-memory graphidx.Source whose pairs are produced by a
// generator, so sources with millions of pairs need no pair slice.
type memSource struct {
	contexts uint64
	ents     []graphidx.EntityRecord
	pairs    func(fn func(graphidx.PairRecord) error) error
}

func (s *memSource) Contexts() uint64                               { return s.contexts }
func (s *memSource) Entities() []graphidx.EntityRecord              { return s.ents }
func (s *memSource) Pairs(fn func(graphidx.PairRecord) error) error { return s.pairs(fn) }

// twoValues are the value labels of every entity of the synthetic sources:
// "closed" < "open" in byte order, as graphidx requires.
var twoValues = []string{"closed", "open"}

// LeafName is the name of leaf i of HubSource (zero-padded so names sort
// in leaf order).
func LeafName(i int) string { return fmt.Sprintf("leaf-%07d", i) }

// Hub entity names of HubSource.
const (
	HubA = "hub-a"
	HubB = "hub-b"
)

// HubSource returns the index content of an adversarial hub graph: two hub
// entities (HubA, HubB) that each co-occur with every one of leaves leaf
// entities, and with each other. It models a corpus of 2·leaves contexts:
// for every leaf i, one context {hub-a=closed, hub-b=closed, leaf i=closed}
// and one with every value "open". So each hub has leaves+1 neighbours, the
// pair (HubA, HubB) has support 2·leaves and shares every leaf as a one-bridge
// chain, and a leaf-to-leaf query has exactly two chains of one bridge.
// Pairs: 2·leaves+1; memory O(leaves) for the entity records.
func HubSource(leaves int) graphidx.Source {
	n := uint64(leaves)
	ents := make([]graphidx.EntityRecord, 0, leaves+2)
	ents = append(ents,
		graphidx.EntityRecord{Name: HubA, Values: twoValues, Marginal: []uint64{n, n}},
		graphidx.EntityRecord{Name: HubB, Values: twoValues, Marginal: []uint64{n, n}})
	for i := range leaves {
		ents = append(ents, graphidx.EntityRecord{Name: LeafName(i), Values: twoValues, Marginal: []uint64{1, 1}})
	}
	return &memSource{
		contexts: 2 * n,
		ents:     ents,
		pairs: func(fn func(graphidx.PairRecord) error) error {
			hubs := []uint32{uint32(n), 0, 0, uint32(n)}
			diag := []uint32{1, 0, 0, 1}
			if err := fn(graphidx.PairRecord{A: 0, B: 1, Counts: hubs}); err != nil {
				return err
			}
			for a := range graphidx.EntityID(2) {
				for i := range graphidx.EntityID(leaves) {
					if err := fn(graphidx.PairRecord{A: a, B: 2 + i, Counts: diag}); err != nil {
						return err
					}
				}
			}
			return nil
		},
	}
}

// ChainName is the name of link i of ChainSource.
func ChainName(i int) string { return fmt.Sprintf("link-%05d", i) }

// ChainSource returns a path graph link-00000 — link-00001 — … of n
// entities, each adjacent pair observed together in 2 contexts (once per
// value, both ends taking the same value). A query between the ends of a
// long path has no chain of at most router.MaxBridgesLimit bridges.
func ChainSource(n int) graphidx.Source {
	ents := make([]graphidx.EntityRecord, n)
	for i := range ents {
		m := uint64(2)
		if i == 0 || i == n-1 {
			m = 1
		}
		ents[i] = graphidx.EntityRecord{Name: ChainName(i), Values: twoValues, Marginal: []uint64{m, m}}
	}
	return &memSource{
		contexts: 2 * uint64(max(n-1, 0)),
		ents:     ents,
		pairs: func(fn func(graphidx.PairRecord) error) error {
			diag := []uint32{1, 0, 0, 1}
			for i := 0; i+1 < n; i++ {
				if err := fn(graphidx.PairRecord{A: graphidx.EntityID(i), B: graphidx.EntityID(i + 1), Counts: diag}); err != nil {
					return err
				}
			}
			return nil
		},
	}
}

// GridName is the name of entity i of GridSource.
func GridName(i int) string { return fmt.Sprintf("zone-%04d", i) }

// GridSource returns a random sparse co-occurrence graph over n entities
// with two values each, drawn from a PCG seeded with seed: every entity is
// linked to deg random others (so the degree is about 2·deg), and each pair
// table is a random 2×2 count table. Different seeds give different
// content (and generations) over the same entity names, which is what the
// hot-swap tests need. Deterministic for a given (n, deg, seed).
func GridSource(n, deg int, seed uint64) graphidx.Source {
	rng := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	type key struct{ a, b int }
	tables := map[key][4]uint32{}
	for a := range n {
		for range deg {
			b := rng.IntN(n)
			if a == b {
				continue
			}
			k := key{min(a, b), max(a, b)}
			var t [4]uint32
			for j := range t {
				t[j] = uint32(rng.IntN(5))
			}
			t[rng.IntN(4)]++ // support ≥ 1
			tables[k] = t
		}
	}
	// Marginals: each pair's table counts distinct contexts, so the
	// marginal of a value is the sum over its pairs' rows (or columns): a
	// corpus with one context per counted cell has exactly these counts.
	marg := make([][2]uint64, n)
	var contexts uint64
	keys := make([]key, 0, len(tables))
	for k, t := range tables {
		keys = append(keys, k)
		marg[k.a][0] += uint64(t[0] + t[1])
		marg[k.a][1] += uint64(t[2] + t[3])
		marg[k.b][0] += uint64(t[0] + t[2])
		marg[k.b][1] += uint64(t[1] + t[3])
		contexts += uint64(t[0] + t[1] + t[2] + t[3])
	}
	slices.SortFunc(keys, func(x, y key) int {
		if c := cmp.Compare(x.a, y.a); c != 0 {
			return c
		}
		return cmp.Compare(x.b, y.b)
	})
	ents := make([]graphidx.EntityRecord, n)
	for i := range ents {
		m := marg[i]
		m[0]++ // one context observing the entity alone keeps both marginals > 0
		m[1]++
		contexts += 2
		ents[i] = graphidx.EntityRecord{Name: GridName(i), Values: twoValues, Marginal: []uint64{m[0], m[1]}}
	}
	return &memSource{
		contexts: contexts,
		ents:     ents,
		pairs: func(fn func(graphidx.PairRecord) error) error {
			for _, k := range keys {
				t := tables[k]
				if err := fn(graphidx.PairRecord{A: graphidx.EntityID(k.a), B: graphidx.EntityID(k.b), Counts: t[:]}); err != nil {
					return err
				}
			}
			return nil
		},
	}
}
