package scorer_test

import (
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// prefetchStats is localStats with scorer.PairPrefetcher: it records the
// announced pairs, checks that a named entry holds the pair, and counts
// the announced pairs that are then read.
type prefetchStats struct {
	*localStats
	t       *testing.T
	pending map[[2]graphidx.EntityID]bool // announced, fetched, not yet read
	wanted  int
	read    int
	queued  bool // WantPair since the last FetchPairs
}

func (p *prefetchStats) WantPair(a, b graphidx.EntityID, ent uint32) {
	if ent != graphidx.NoPairHint {
		rk := p.RankedNeighbors(a)
		if int(ent) >= len(rk) || rk[ent] != b {
			p.t.Errorf("WantPair(%d, %d, entry %d): ranked list %v", a, b, ent, rk)
		}
	}
	p.pending[[2]graphidx.EntityID{min(a, b), max(a, b)}] = true
	p.wanted++
	p.queued = true
}

func (p *prefetchStats) FetchPairs() { p.queued = false }

func (p *prefetchStats) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	if p.queued {
		p.t.Errorf("Pair(%d, %d) before FetchPairs", a, b)
	}
	k := [2]graphidx.EntityID{min(a, b), max(a, b)}
	if p.pending[k] {
		delete(p.pending, k)
		p.read++
	}
	return p.localStats.Pair(a, b)
}

var _ scorer.PairPrefetcher = (*prefetchStats)(nil)

// TestPairPrefetcherChangesNothing: on random sparse worlds the Bayes
// model's direct and chained estimates are the same, bit for bit, through
// statistics that implement scorer.PairPrefetcher, every named entry holds
// its pair, and every announced pair is read.
func TestPairPrefetcherChangesNothing(t *testing.T) {
	t.Parallel()
	m := mustBayes(t)
	for seed := range uint64(20) {
		rng := rand.New(rand.NewPCG(seed, 7))
		const n = 14
		st := newLocalStats()
		for id := graphidx.EntityID(1); id <= n; id++ {
			st.entity(id, 2)
		}
		for id := graphidx.EntityID(1); id <= n; id++ {
			tot := []uint64{0, 0}
			st.marg[id] = tot
		}
		for a := graphidx.EntityID(1); a <= n; a++ {
			for b := a + 1; b <= n; b++ {
				if rng.IntN(4) != 0 {
					continue
				}
				rows := [][]uint32{{uint32(1 + rng.IntN(300)), uint32(1 + rng.IntN(300))}, {uint32(1 + rng.IntN(300)), uint32(1 + rng.IntN(300))}}
				st.link(a, b, rows)
				for r := range 2 {
					st.marg[a][r] += uint64(rows[r][0] + rows[r][1])
					st.marg[b][r] += uint64(rows[0][r] + rows[1][r])
				}
			}
		}
		pf := &prefetchStats{localStats: st, t: t, pending: map[[2]graphidx.EntityID]bool{}}
		for s := graphidx.EntityID(1); s <= n; s++ {
			for tg := graphidx.EntityID(1); tg <= n; tg++ {
				if s == tg {
					continue
				}
				for u := range 2 {
					want, err1 := m.Direct(nil, st, s, u, tg)
					got, err2 := m.Direct(nil, pf, s, u, tg)
					if (err1 == nil) != (err2 == nil) || want.Err != got.Err || !slices.Equal(want.Dist, got.Dist) {
						t.Fatalf("seed %d, %d=%d → %d: direct %+v, %v with the prefetcher, %+v, %v without", seed, s, u, tg, got, err2, want, err1)
					}
					for _, b := range st.adj[s] {
						if b == tg {
							continue
						}
						bridges := []graphidx.EntityID{b}
						want, err1 := m.Chain(nil, st, s, u, bridges, tg)
						got, err2 := m.Chain(nil, pf, s, u, bridges, tg)
						if (err1 == nil) != (err2 == nil) || want.Err != got.Err || !slices.Equal(want.Dist, got.Dist) {
							t.Fatalf("seed %d, %d=%d → %d → %d: chain %+v, %v with the prefetcher, %+v, %v without", seed, s, u, b, tg, got, err2, want, err1)
						}
					}
				}
			}
		}
		if len(pf.pending) != 0 {
			t.Errorf("seed %d: %d announced pairs never read: %v", seed, len(pf.pending), pf.pending)
		}
		if pf.wanted == 0 {
			t.Errorf("seed %d: no pair announced", seed)
		}
	}
}
