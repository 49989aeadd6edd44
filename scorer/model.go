package scorer

import "github.com/hopwise/hopwise/graphidx"

// Estimate is a model's answer for the target entity given the observed one.
type Estimate struct {
	// Dist is the estimated distribution over the target's values, indexed
	// like the target's value labels. It is freshly allocated per call and
	// owned by the caller, unless the caller opted in to a borrowed buffer
	// with Workspace.BorrowDist (then it is valid until the next call with
	// that workspace).
	Dist []float64
	// Err is the expected squared error of Dist summed over the target's
	// values (for the Bayes model: Σ_v Var(p̂_v), plus β·m for a chain).
	Err float64
	// Var is the variance part of Err, Σ_v Var(p̂_v) (Err − Var is the
	// model's bias allowance: β·m, the missing-signal and the separation
	// terms). For the support model, whose error is not a variance, Var =
	// Err.
	Var float64
	// Support is the pair support for a direct estimate, and the smallest
	// edge support along the chain for a chained one (0 when some edge was
	// never observed).
	Support uint64
}

// Model estimates a target's distribution, directly or through bridges,
// together with the expected error of that estimate.
//
// Implementations are immutable and safe for concurrent use; the Workspace
// argument carries per-call scratch space and must not be shared between
// goroutines (nil means "allocate a temporary one").
type Model interface {
	// Direct estimates P(t | s = u) from the pair (s, t) alone.
	Direct(ws *Workspace, st Stats, s graphidx.EntityID, u int, t graphidx.EntityID) (Estimate, error)
	// Chain estimates P(t | s = u) through the ordered bridges b1..bm
	// (m = len(bridges) may be 0, which gives the direct estimate with the
	// chain error model).
	Chain(ws *Workspace, st Stats, s graphidx.EntityID, u int, bridges []graphidx.EntityID, t graphidx.EntityID) (Estimate, error)
	// EdgeCost is the additive per-edge proxy used to generate chain
	// candidates cheaply (docs/DESIGN.md, Bridge search): the router scores exactly only the
	// k chains of smallest Σ_edges EdgeCost + HopBias·m. It must be ≥ 0
	// (the search prunes on partial sums), need not be monotone in
	// support, and should be cheap and allocation-free: it runs once per
	// looked-up edge. Bayes: a signal-loss cost from Cramér's V; Support:
	// v0/(support + n0).
	EdgeCost(ps graphidx.PairStats) float64
	// HopBias is β, the squared bias charged per bridge.
	HopBias() float64
	// Name identifies the model in traces and reports.
	Name() string
}

var (
	_ Model = (*Bayes)(nil)
	_ Model = (*Support)(nil)
)
