package testgraph

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"

	"github.com/hopwise/hopwise/graphidx"
)

// PowerLaw is a Chung–Lu random graph (Chung & Lu 2002): entity i has
// weight w_i ∝ (i+1)^(−1/(γ−1)), and M = n·d/2 edge draws pick both
// endpoints proportionally to weight (duplicates and loops dropped), which
// gives a degree distribution with tail exponent γ. Every entity has two
// values; a pair's 2×2 table holds random counts.
type PowerLaw struct {
	n      int
	ctxs   uint64 // every context observes exactly one pair
	ents   []graphidx.EntityRecord
	edges  []uint64 // a<<32 | b, ascending
	counts []uint32 // 4 per edge
}

// Contexts returns the number of contexts (each observes one pair).
func (s *PowerLaw) Contexts() uint64 { return s.ctxs }

// Entities returns the entities "sensor0…" in ascending name (= id) order.
func (s *PowerLaw) Entities() []graphidx.EntityRecord { return s.ents }

// Pairs calls fn with every edge in ascending (A, B) order.
func (s *PowerLaw) Pairs(fn func(graphidx.PairRecord) error) error {
	for i, e := range s.edges {
		p := graphidx.PairRecord{A: graphidx.EntityID(e >> 32), B: graphidx.EntityID(e & 0xffffffff), Counts: s.counts[4*i : 4*i+4 : 4*i+4]}
		if err := fn(p); err != nil {
			return err
		}
	}
	return nil
}

// NewPowerLaw generates n entities with expected average degree avgDeg and
// tail exponent gamma from seed. The output for given arguments never
// changes: the router's golden decision digests are pinned to it. O(n + m·log n)
// for m = n·avgDeg/2 edge draws.
func NewPowerLaw(n int, avgDeg float64, gamma float64, seed uint64) *PowerLaw {
	rng := rand.New(rand.NewPCG(seed, 99))
	cum := make([]float64, n)
	var tot float64
	for i := 0; i < n; i++ {
		tot += math.Pow(float64(i+1), -1/(gamma-1))
		cum[i] = tot
	}
	draw := func() int {
		x := rng.Float64() * tot
		i, _ := slices.BinarySearch(cum, x)
		if i >= n {
			i = n - 1
		}
		return i
	}
	m := int(float64(n) * avgDeg / 2)
	edges := make([]uint64, 0, m)
	for len(edges) < m {
		a, b := draw(), draw()
		if a == b {
			continue
		}
		if a > b {
			a, b = b, a
		}
		edges = append(edges, uint64(a)<<32|uint64(b))
	}
	slices.Sort(edges)
	edges = slices.Compact(edges)
	width := len(strconv.Itoa(n))
	s := &PowerLaw{n: n}
	for i := 0; i < n; i++ {
		// names sorted ascending == ids, by zero padding
		s.ents = append(s.ents, graphidx.EntityRecord{
			Name: fmt.Sprintf("sensor%0*d", width, i), Values: []string{"off", "on"}, Marginal: []uint64{0, 0}})
	}
	s.edges = edges
	s.counts = make([]uint32, 4*len(edges))
	for i, e := range edges {
		a, b := graphidx.EntityID(e>>32), graphidx.EntityID(e&0xffffffff)
		c := s.counts[4*i : 4*i+4]
		scale := 1 + rng.IntN(40)
		for j := range c {
			c[j] = uint32(rng.IntN(scale))
		}
		c[rng.IntN(4)]++
		s.ctxs += uint64(c[0] + c[1] + c[2] + c[3])
		for u := 0; u < 2; u++ {
			s.ents[a].Marginal[u] += uint64(c[u*2] + c[u*2+1])
			s.ents[b].Marginal[u] += uint64(c[u] + c[2+u])
		}
	}
	return s
}
