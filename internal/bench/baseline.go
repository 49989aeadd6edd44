package bench

import (
	"cmp"
	"fmt"
	"math"
	"slices"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
)

// Bounds are the search limits applied alike to the router and to the
// baselines: H bridges, beam B, k candidates scored exactly, the expansion
// budget, and τ_gain for the mode. FanOut is the router's second-layer
// fan-out f (router.WithFanOut; 0 keeps router.DefaultFanOut); the
// baselines' layers are all B wide.
type Bounds struct {
	MaxBridges    int     `json:"max_bridges"`
	Beam          int     `json:"beam"`
	FanOut        int     `json:"fan_out"`
	MaxCandidates int     `json:"max_candidates"`
	Budget        int     `json:"expansion_budget"`
	GainThreshold float64 `json:"gain_threshold"`
	// Parallel lets the router's parallel answer compete
	// (router.WithParallelBridges); the baselines have none.
	Parallel bool `json:"parallel_bridges"`
}

// DefaultBounds returns the router's defaults (H, B, f, k, budget and τ:
// router.DefaultMaxBridges and the like).
func DefaultBounds() Bounds {
	return Bounds{
		MaxBridges:    router.DefaultMaxBridges,
		Beam:          router.DefaultBeam,
		FanOut:        router.DefaultFanOut,
		MaxCandidates: router.DefaultMaxCandidates,
		Budget:        router.DefaultExpansionBudget,
		GainThreshold: router.DefaultGainThreshold,
		Parallel:      router.DefaultParallelBridges,
	}
}

// GenerousBounds returns bounds wide enough that searches on small graphs
// are exhaustive (used for the agreement check).
func GenerousBounds() Bounds {
	return Bounds{MaxBridges: 3, Beam: 1 << 20, FanOut: 1 << 20, MaxCandidates: 1 << 16, Budget: 1 << 30}
}

// RouterOptions returns the router options for b.
func (b Bounds) RouterOptions() []router.Option {
	opts := []router.Option{
		router.WithMaxBridges(b.MaxBridges),
		router.WithBeam(b.Beam),
		router.WithMaxCandidates(b.MaxCandidates),
		router.WithExpansionBudget(b.Budget),
		router.WithGainThreshold(b.GainThreshold),
	}
	if b.FanOut != 0 {
		opts = append(opts, router.WithFanOut(b.FanOut))
	}
	opts = append(opts, router.WithParallelBridges(b.Parallel))
	return opts
}

func (b Bounds) validate() error {
	if b.MaxBridges < 0 || b.MaxBridges > router.MaxBridgesLimit || b.Beam < 1 || b.FanOut < 0 || b.MaxCandidates < 1 || b.Budget < 1 {
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
	// pair returns the statistics of the pair in ascending id order (the
	// orientation the router reads, so proxy costs match bit for bit), ok
	// false when x and y never met. One look-up.
	pair(x, y N) (graphidx.PairStats, bool)
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
	err  float64 // exact chain error, NaN until scored
	// margin is the model's gain margin of the chain's reference-bias
	// estimate (scorer.GainMarginer), set with err; the router ranks
	// chains by gain − margin.
	margin float64
}

// search is the input of beamSearch beyond the graph.
type search struct {
	st        scorer.Stats
	model     scorer.Model
	ws        *scorer.Workspace
	b         Bounds
	sid, tid  graphidx.EntityID
	u         int
	directErr float64
	// ref is the reference estimate of the reference-bias term (see
	// setRef); nil until chosen. refVar is its variance part, for the
	// model's gain margin.
	ref    []float64
	refVar float64
}

// score returns the exact error of c, computing it once: the model's
// chain error plus scorer.ReferenceBias of its estimate against the
// reference, the router's stage-2 error.
func (sr *search) score(c *bcand) (float64, error) {
	if c.err == c.err { // not NaN
		return c.err, nil
	}
	est, err := sr.model.Chain(sr.ws, sr.st, sr.sid, sr.u, c.ids, sr.tid)
	if err != nil {
		return 0, err
	}
	c.err = est.Err
	if sr.ref != nil {
		c.err += scorer.ReferenceBias(est.Dist, sr.ref)
		if gm, ok := sr.model.(scorer.GainMarginer); ok {
			c.margin = gm.GainMargin(est.Var, sr.refVar)
		}
	} else {
		// The reference itself: bias 0, no margin; measured against as the
		// model projects it (scorer.ReferenceProjector), as the router does.
		ref := slices.Clone(est.Dist)
		if rp, ok := sr.model.(scorer.ReferenceProjector); ok {
			if err := rp.ProjectReference(sr.ws, sr.st, sr.sid, sr.u, sr.tid, ref); err != nil {
				return 0, err
			}
		}
		sr.ref, sr.refVar = ref, est.Var
	}
	return c.err, nil
}

// setRef chooses the reference among cands the way the router does when
// the endpoints were never observed together (otherwise the direct
// estimate is the reference, set before the search): the proxy-cheapest
// chain by (cost, hops, ids) among all generated chains. It scores that
// chain first, with bias 0. The caller passes every generated chain (or
// the k cheapest, which hold the cheapest).
func (sr *search) setRef(cands []bcand) error {
	if sr.ref != nil || len(cands) == 0 {
		return nil
	}
	best := 0
	for i := range cands {
		if candCompare(&cands[i], &cands[best]) < 0 {
			best = i
		}
	}
	_, err := sr.score(&cands[best])
	return err
}

// candCompare orders candidates by (proxy cost, hops, ids).
func candCompare(p, q *bcand) int {
	if c := cmp.Compare(p.cost, q.cost); c != 0 {
		return c
	}
	if c := cmp.Compare(len(p.ids), len(q.ids)); c != 0 {
		return c
	}
	return slices.Compare(p.ids, q.ids)
}

// beamSearch is the straightforward bounded breadth-first search shared by
// the baselines: layer d holds paths s → b1 → … → bd, built from layer d−1 by
// extending every path with its node's B best-supported eligible
// neighbours (simple paths, never s or t), sorted by the additive proxy
// Σ EdgeCost(pair statistics) and cut to the B cheapest; every path whose end
// touches t is a chain candidate. The k proxy-cheapest candidates are
// scored exactly with model.Chain, and the largest gain wins (the first in
// (proxy cost, hops, ids) order on equal gains, like the router).
//
// Errors are the router's stage-2 errors: model.Chain's error plus the
// squared distance from a reference estimate (scorer.ReferenceBias; the
// direct estimate when the endpoints were observed together, else the
// reference chain of setRef).
//
// Exact pruning: a chain of m bridges has error ≥ β·m (its variance and
// bias parts are ≥ 0), so when the reference is known (the endpoints were
// observed together), before layer d is built, while at most k candidates
// exist, they are scored and the search stops when the best error is
// ≤ β·d: no longer chain can beat it. This is not a cut.
//
// When no bound cuts, every simple chain of at most H bridges that could
// win is scored: the result is the exact optimum. O(H·B²·(log B + L))
// look-ups and sorting, L one pair look-up, plus k exact scores.
func beamSearch[N comparable, A adjacency[N]](a A, sr *search, s, t N, r *Result, name func(graphidx.EntityID) string) error {
	b := sr.b
	budget := b.Budget
	truncated := false
	take := func() bool {
		if budget <= 0 {
			truncated = true
			return false
		}
		budget--
		return true
	}
	hb := sr.model.HopBias()
	var cands []bcand
	scored := 0
	bestErr := math.Inf(1)
	frontier := []bpath[N]{{}}
	for depth := 1; depth <= b.MaxBridges; depth++ {
		// Without the direct estimate the reference needs every chain, so
		// only a search with a known reference stops early.
		if depth > 1 && len(cands) <= b.MaxCandidates && sr.ref != nil {
			for i := scored; i < len(cands); i++ {
				e, err := sr.score(&cands[i])
				if err != nil {
					return err
				}
				bestErr = math.Min(bestErr, e)
			}
			scored = len(cands)
			if bestErr <= hb*float64(depth) {
				break
			}
		}
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
				ps, ok := a.pair(x, y)
				if !ok {
					continue
				}
				nodes := append(p.nodes[:len(p.nodes):len(p.nodes)], y)
				ext = append(ext, bpath[N]{nodes: nodes, cost: p.cost + sr.model.EdgeCost(ps)})
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
			ps, ok := a.pair(p.nodes[len(p.nodes)-1], t)
			if !ok {
				continue
			}
			ids := make([]graphidx.EntityID, len(p.nodes))
			for i, y := range p.nodes {
				ids[i] = a.id(y)
			}
			cands = append(cands, bcand{ids: ids, cost: p.cost + sr.model.EdgeCost(ps) + hb*float64(depth), err: math.NaN()})
		}
		frontier = ext
		if len(frontier) == 0 {
			break
		}
	}
	slices.SortStableFunc(cands, func(p, q bcand) int { return candCompare(&p, &q) })
	if len(cands) > b.MaxCandidates {
		truncated = true
		cands = cands[:b.MaxCandidates]
	}
	if err := sr.setRef(cands); err != nil {
		return err
	}
	r.Truncated = truncated
	best := -1
	var bestGain float64
	for i := range cands {
		e, err := sr.score(&cands[i])
		if err != nil {
			return err
		}
		// Ranked like the router: by the gain less the margin of the
		// chain's bias estimate; the reported gain keeps no margin.
		gain := sr.directErr - e
		if best < 0 || gain-cands[i].margin > bestGain-cands[best].margin {
			best, bestErr, bestGain = i, e, gain
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

// copyMarginal returns a copy of id's marginal value counts when g has
// them (scorer.Marginals), else nil: a baseline holds its own copy of
// every statistic it scores with, as it does of the pair tables.
func copyMarginal(g router.Graph, id graphidx.EntityID) []uint64 {
	m, ok := g.(scorer.Marginals)
	if !ok {
		return nil
	}
	return append([]uint64(nil), m.Marginal(id)...)
}
