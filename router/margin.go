package router

import (
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// Marginal implements scorer.Marginals for the model's direct estimate:
// the graph's marginal counts when the graph has them (*graphidx.Index
// does; a wrapper should forward the method), else nil, which makes the
// Bayes model fall back to its uniform prior. O(1).
func (sc *scratch) Marginal(id graphidx.EntityID) []uint64 {
	if m, ok := sc.g.(scorer.Marginals); ok {
		return m.Marginal(id)
	}
	return nil
}

// chainScore returns the error of an exactly scored chain estimate of m
// bridges, est.Err plus its squared distance from the reference
// (scorer.ReferenceBias; none while the reference is unknown, i.e. for the
// reference chain itself), and its routing score: the score of the gain
// E_direct − err less the model's gain margin for that bias estimate
// (scorer.GainMarginer, from the chain's and the reference's variances;
// 0 for models without one). The margin is ≥ 0, so score ≤ bound(m) still
// holds. O(K).
func (sc *scratch) chainScore(est scorer.Estimate, m int) (err, score float64) {
	err = est.Err
	margin := 0.0
	if sc.ref != nil {
		err += scorer.ReferenceBias(est.Dist, sc.ref)
		if gm, ok := sc.model.(scorer.GainMarginer); ok {
			margin = gm.GainMargin(est.Var, sc.refVar)
		}
	}
	return err, sc.scoreOf(sc.dirErr-err-margin, m)
}

// RankedNeighbors implements scorer.RankedNeighborer for the model's
// separation check: the graph's support-ranked neighbours. O(1).
func (sc *scratch) RankedNeighbors(id graphidx.EntityID) []graphidx.EntityID {
	return sc.g.RankedNeighbors(id)
}
