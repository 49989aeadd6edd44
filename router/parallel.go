package router

import (
	"math"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// parCharge: charge the best chain, when it runs through one of the two
// bridges, the part of its distance from the parallel answer that the
// parallel answer's own error does not explain (see parallel). A test
// switch.
var parCharge = true

// parallel scores the parallel answer (scorer.ParallelBridger) through the
// two one-bridge candidates of smallest proxy cost, when the one-bridge
// phase scored at least two, and reports whether it beats best (the best
// chain's score). Its Err adds, like a chain's, the squared distance from
// the reference when that is the direct estimate, with the gain margin.
// When the reference is a chain the parallel answer is charged only the
// part of that distance the reference's own bias allowance b_ref does not
// explain, (‖p̂ − ref‖ − √b_ref)₊² (triangle inequality: the reference is
// within √b_ref of the truth if its allowance holds): the reference chain
// is one of the single-bridge answers the parallel answer corrects.
// On success sc.parCand, sc.parDist and sc.parSup hold the answer.
// Cost: one scan of the heap, and when two candidates exist, 4–5 pair
// look-ups (memoised) and the model's O(K⁴)-ish arithmetic.
func (sc *scratch) parallel(best float64, bestC cand, bestDist []float64, bestErr float64) (ok bool, errP, score float64, fail error) {
	if !sc.st.cfg.ParallelBridges {
		return false, 0, 0, nil
	}
	pm, isPar := sc.model.(scorer.ParallelBridger)
	if !isPar || sc.ref == nil {
		return false, 0, 0, nil
	}
	// The two one-bridge candidates of smallest proxy cost (ties by id).
	i1, i2 := -1, -1
	for i := range sc.heap {
		c := &sc.heap[i]
		if c.m != 1 {
			continue
		}
		switch {
		case i1 < 0 || candLess(c, &sc.heap[i1]):
			i2, i1 = i1, i
		case i2 < 0 || candLess(c, &sc.heap[i2]):
			i2 = i
		}
	}
	if i2 < 0 {
		return false, 0, 0, nil
	}
	// Its Err is ≥ 0 (and ≥ 2β), so it cannot beat a score at the bound.
	if sc.bound(2) <= best {
		return false, 0, 0, nil
	}
	b1, b2 := sc.heap[i1].b[0], sc.heap[i2].b[0]
	est, ok, err := pm.Parallel(sc.ws, sc, sc.s, sc.u, b1, b2, sc.t)
	if err != nil || !ok {
		return false, 0, 0, err
	}
	errP = est.Err
	margin := 0.0
	switch {
	case !sc.refChain:
		errP += scorer.ReferenceBias(est.Dist, sc.ref)
	case sc.refC.m == 1 && (sc.refC.b[0] == b1 || sc.refC.b[0] == b2):
		// The reference is one of the two single-bridge answers, which
		// the parallel answer corrects: no distance charge.
	default:
		errP += scorer.ReferenceBias(est.Dist, sc.ref)
	}
	if gm, ok := sc.model.(scorer.GainMarginer); ok {
		margin = gm.GainMargin(est.Var, sc.refVar)
	}
	score = sc.scoreOf(sc.dirErr-errP-margin, 2)
	if parCharge && bestC.m == 1 && (bestC.b[0] == b1 || bestC.b[0] == b2) {
		// The best chain is one of the two single-bridge answers; the part
		// of its distance from the parallel answer that the latter's own
		// error does not explain is the route it misses.
		d := math.Sqrt(scorer.ReferenceBias(est.Dist, bestDist)) - math.Sqrt(est.Err)
		if d > 0 {
			best -= sc.scoreOf(d*d, 0) - sc.scoreOf(0, 0)
		}
	}
	if !(score > best) {
		return false, 0, 0, nil
	}
	sc.parCand = cand{b: [3]graphidx.EntityID{b1, b2}, m: 2}
	sc.parDist = append(sc.parDist[:0], est.Dist...)
	sc.parSup = est.Support
	return true, errP, score, nil
}
