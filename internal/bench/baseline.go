package bench

import (
	"cmp"
	"fmt"
	"slices"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
)

// Bounds are the search limits applied alike to the router and to the
// baselines: H bridges, beam B, k candidates scored exactly, the expansion
// budget, and τ_gain for the mode.
type Bounds struct {
	MaxBridges    int
	Beam          int
	MaxCandidates int
	Budget        int
	GainThreshold float64
}

// DefaultBounds returns the router's defaults (H=3, B=64, k=16, budget
// 65536, τ=0).
func DefaultBounds() Bounds {
	return Bounds{
		MaxBridges:    router.DefaultMaxBridges,
		Beam:          router.DefaultBeam,
		MaxCandidates: router.DefaultMaxCandidates,
		Budget:        router.DefaultExpansionBudget,
		GainThreshold: router.DefaultGainThreshold,
	}
}

// GenerousBounds returns bounds wide enough that searches on small graphs
// are exhaustive (used for the agreement check).
func GenerousBounds() Bounds {
	return Bounds{MaxBridges: 3, Beam: 1 << 20, MaxCandidates: 1 << 16, Budget: 1 << 30}
}

// RouterOptions returns the router options for b.
func (b Bounds) RouterOptions() []router.Option {
	return []router.Option{
		router.WithMaxBridges(b.MaxBridges),
		router.WithBeam(b.Beam),
		router.WithMaxCandidates(b.MaxCandidates),
		router.WithExpansionBudget(b.Budget),
		router.WithGainThreshold(b.GainThreshold),
	}
}

func (b Bounds) validate() error {
	if b.MaxBridges < 0 || b.MaxBridges > router.MaxBridgesLimit || b.Beam < 1 || b.MaxCandidates < 1 || b.Budget < 1 {
		return fmt.Errorf("%w: bounds %+v", ErrBadConfig, b)
	}
	return nil
}

// Result is a baseline's answer to one query.
type Result struct {
	Mode      router.Mode
	DirectErr float64
	HasChain  bool
	Bridges   []string // best chain, From → To order
	ChainErr  float64
	Gain      float64 // DirectErr − ChainErr (0 without a chain)
	// Truncated reports that a bound cut the search (a node had more than
	// B eligible neighbours, a layer more than B paths, more than k chains
	// were found, or the budget ran out).
	Truncated bool
}

// adjacency is what the beam search reads from a baseline's graph.
type adjacency[N comparable] interface {
	// ranked returns x's neighbours by descending support, ties by
	// ascending id (the order of graphidx's support-ranked lists).
	ranked(x N) []N
	// support returns the pair support, ok false when x and y never met.
	support(x, y N) (uint64, bool)
	// id maps a node to its index id (for tie-breaking and scoring).
	id(x N) graphidx.EntityID
}

type bpath[N comparable] struct {
	nodes []N // bridges so far
	cost  float64
}

type bcand struct {
	ids  []graphidx.EntityID
	cost float64
}

// beamSearch is the straightforward bounded breadth-first search shared by
// the baselines: layer d holds paths s → b1 → … → bd, built from layer d−1 by
// extending every path with its node's B best-supported eligible
// neighbours (simple paths, never s or t), sorted by the additive proxy
// Σ EdgeCost(support) and cut to the B cheapest; every path whose end
// touches t is a chain candidate. The k proxy-cheapest candidates are
// scored exactly with model.Chain, and the largest gain wins (the first in
// (proxy cost, hops, ids) order on equal gains, like the router). When no
// bound cuts, every simple chain of at most H bridges is scored: the result
// is the exact optimum. O(H·B²·(log B + L)) where L is one pair look-up.
func beamSearch[N comparable, A adjacency[N]](a A, st scorer.Stats, model scorer.Model, ws *scorer.Workspace,
	b Bounds, s, t N, u int) (cands []bcand, truncated bool) {
	budget := b.Budget
	take := func() bool {
		if budget <= 0 {
			truncated = true
			return false
		}
		budget--
		return true
	}
	hb := model.HopBias()
	frontier := []bpath[N]{{}}
	for depth := 1; depth <= b.MaxBridges; depth++ {
		var ext []bpath[N]
	paths:
		for _, p := range frontier {
			x := s
			if len(p.nodes) > 0 {
				x = p.nodes[len(p.nodes)-1]
			}
			n := 0
			for _, y := range a.ranked(x) {
				if !take() {
					break paths
				}
				if y == s || y == t || slices.Contains(p.nodes, y) {
					continue
				}
				if n == b.Beam {
					truncated = true
					break
				}
				sup, ok := a.support(x, y)
				if !ok {
					continue
				}
				nodes := append(p.nodes[:len(p.nodes):len(p.nodes)], y)
				ext = append(ext, bpath[N]{nodes: nodes, cost: p.cost + model.EdgeCost(sup)})
				n++
			}
		}
		slices.SortStableFunc(ext, func(p, q bpath[N]) int {
			if c := cmp.Compare(p.cost, q.cost); c != 0 {
				return c
			}
			for i := range p.nodes {
				if c := cmp.Compare(a.id(p.nodes[i]), a.id(q.nodes[i])); c != 0 {
					return c
				}
			}
			return 0
		})
		if len(ext) > b.Beam {
			truncated = true
			ext = ext[:b.Beam]
		}
		for _, p := range ext {
			if !take() {
				break
			}
			sup, ok := a.support(p.nodes[len(p.nodes)-1], t)
			if !ok {
				continue
			}
			ids := make([]graphidx.EntityID, len(p.nodes))
			for i, y := range p.nodes {
				ids[i] = a.id(y)
			}
			cands = append(cands, bcand{ids: ids, cost: p.cost + model.EdgeCost(sup) + hb*float64(depth)})
		}
		frontier = ext
		if len(frontier) == 0 {
			break
		}
	}
	slices.SortStableFunc(cands, func(p, q bcand) int {
		if c := cmp.Compare(p.cost, q.cost); c != 0 {
			return c
		}
		if c := cmp.Compare(len(p.ids), len(q.ids)); c != 0 {
			return c
		}
		return slices.Compare(p.ids, q.ids)
	})
	if len(cands) > b.MaxCandidates {
		truncated = true
		cands = cands[:b.MaxCandidates]
	}
	return cands, truncated
}

// scoreCandidates scores the candidates exactly and fills r.
func scoreCandidates(st scorer.Stats, model scorer.Model, ws *scorer.Workspace, b Bounds,
	sid graphidx.EntityID, u int, tid graphidx.EntityID, cands []bcand, name func(graphidx.EntityID) string, r *Result) error {
	best := -1
	var bestErr, bestGain float64
	for i, c := range cands {
		est, err := model.Chain(ws, st, sid, u, c.ids, tid)
		if err != nil {
			return err
		}
		gain := r.DirectErr - est.Err
		if best < 0 || gain > bestGain {
			best, bestErr, bestGain = i, est.Err, gain
		}
	}
	r.Mode = router.ModeDirect
	if best >= 0 {
		r.HasChain = true
		r.ChainErr = bestErr
		r.Gain = bestGain
		for _, id := range cands[best].ids {
			r.Bridges = append(r.Bridges, name(id))
		}
		if bestGain >= b.GainThreshold {
			r.Mode = router.ModeChain
		}
	}
	return nil
}

// rankBySupport sorts ids by descending support, ties by ascending id.
func rankBySupport(ids []graphidx.EntityID, sup []uint64) {
	idx := make([]int, len(ids))
	for i := range idx {
		idx[i] = i
	}
	slices.SortFunc(idx, func(i, j int) int {
		if c := cmp.Compare(sup[j], sup[i]); c != 0 {
			return c
		}
		return cmp.Compare(ids[i], ids[j])
	})
	out := make([]graphidx.EntityID, len(ids))
	for k, i := range idx {
		out[k] = ids[i]
	}
	copy(ids, out)
}
