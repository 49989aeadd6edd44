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
// reference chain itself) plus the bias the model deferred
// (scorer.PendingBiaser; the router's workspace defers the Bayes model's
// separation bias), and its routing score: the score of the gain
// E_direct − err less the model's gain margin for the reference-bias
// estimate (scorer.GainMarginer, from the chain's and the reference's
// variances; 0 for models without one).
//
// With beat set, the deferred bias (≥ 0) is computed only when the score
// without it exceeds *beat: otherwise the chain loses either way, and the
// returned err and score leave the term out. So a decision is exactly the
// one that always computing the term gives, while chains that cannot win
// skip its pair look-ups. It must follow the Chain call of est with no
// other model call in between. The margin and the bias are ≥ 0, so
// score ≤ bound(m) still holds. O(K) plus the deferred term's cost.
func (sc *scratch) chainScore(est scorer.Estimate, m int, beat *float64) (err, score float64, fail error) {
	err = est.Err
	margin := 0.0
	sc.lastSep = 0
	if sc.ref != nil {
		err += scorer.ReferenceBias(est.Dist, sc.ref)
		if gm, ok := sc.model.(scorer.GainMarginer); ok {
			margin = gm.GainMargin(est.Var, sc.refVar)
		}
	}
	score = sc.scoreOf(sc.dirErr-err-margin, m)
	if pb, ok := sc.model.(scorer.PendingBiaser); ok && (beat == nil || score > *beat) {
		extra, e := pb.PendingBias(sc.ws, sc)
		if e != nil {
			return 0, 0, e
		}
		sc.lastSep = extra * sc.ws.SeparationPrevShare()
		if extra > 0 {
			err += extra
			score = sc.scoreOf(sc.dirErr-err-margin, m)
		}
	}
	return err, score, nil
}

// RankedNeighbors implements scorer.RankedNeighborer for the model's
// separation check: the graph's support-ranked neighbours. O(1).
func (sc *scratch) RankedNeighbors(id graphidx.EntityID) []graphidx.EntityID {
	return sc.g.RankedNeighbors(id)
}

// Neighbors implements scorer.NeighborLister for the model's influence
// bound: every neighbour of the entity. O(1).
func (sc *scratch) Neighbors(id graphidx.EntityID) []graphidx.EntityID {
	return sc.g.Neighbors(id)
}

// deferSeparation is whether decisions defer the model's separation bias to
// the chains that could win (chainScore). Always true in production; a test
// turns it off to check that deferring changes no decision.
var deferSeparation = true
