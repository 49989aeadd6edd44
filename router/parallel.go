package router

import (
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// parCharge turns on the comparison charge of the best chain (see
// parallel); a test switch.
var parCharge = true

// parallel scores the parallel answer (scorer.ParallelBridger,
// docs/QUALITY.md §4e) through the two one-bridge candidates of smallest
// proxy cost, when the one-bridge phase produced at least two, and reports
// whether it beats best, the best chain's score (bestC its candidate,
// bestDist its estimate). Its Err adds, like a chain's, the squared
// distance from the reference when that is the direct estimate (a
// supported pair), with the gain margin; none when the reference is the
// one-bridge chain through one of its own bridges, which is what it
// corrects. When the best chain is the one-bridge chain through b1 or b2
// and its separation check read no witness other than the two bridges
// (checked), that chain is charged, for this comparison only,
// (‖p̂_chain − p̂_par‖ − √Err_par)₊²: the part of its distance from the
// parallel answer that the parallel answer's own error does not explain,
// the route it misses if the pair is the separator. Both routes' chains'
// separation bias is charged too, the larger (inheritedBias). On success
// sc.parCand, sc.parDist and sc.parSup hold the answer. Cost: one scan of
// the heap and, when two candidates exist, 4–5 pair look-ups (memoised in
// the decision) and the model's estimate (8.3 µs for binary entities,
// scorer.BenchmarkParallel).
func (sc *scratch) parallel(best, bestErr float64, bestC cand, bestDist []float64) (ok bool, errP, score float64, fail error) {
	if !sc.st.cfg.ParallelBridges || sc.st.cfg.MaxBridges < 2 {
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
	// No distance charge when the reference is one of the two
	// single-bridge answers, which the parallel answer corrects.
	if !sc.refChain || sc.refC.m != 1 || (sc.refC.b[0] != b1 && sc.refC.b[0] != b2) {
		errP += scorer.ReferenceBias(est.Dist, sc.ref)
	}
	if gm, ok := sc.model.(scorer.GainMarginer); ok {
		margin = gm.GainMargin(est.Var, sc.refVar)
	}
	blend := parCharge && bestC.m == 1 && (bestC.b[0] == b1 || bestC.b[0] == b2) && !sc.checked(b1, b2)
	if blend {
		// The best chain is one of the two single-bridge answers and no
		// table tested it: the pair tables fit the chain's structure (the
		// other bridge a common effect) and the pair's (the endpoint a
		// common effect) alike (docs/QUALITY.md §4e). With both held
		// equally likely, either answer alone expects d²/2 beyond its own
		// error, d² = ‖p̂_chain − p̂_par‖², and their midpoint d²/4.
		d2 := scorer.ReferenceBias(est.Dist, bestDist)
		own := (errP + bestErr) / 2
		errP = d2/4 + own
		best -= sc.scoreOf(d2/2+own-bestErr, 0) - sc.scoreOf(0, 0)
	}
	score = sc.scoreOf(sc.dirErr-errP-margin, 2)
	if !(score > best) {
		return false, 0, 0, nil
	}
	// The separation bias the answer inherits from its bridges' chains
	// (inheritedBias); only now, since it is ≥ 0 and can only lower the
	// score.
	// est.Dist may be the workspace's, which inheritedBias overwrites.
	sc.parDist = append(sc.parDist[:0], est.Dist...)
	sep, err := sc.inheritedBias(b1, b2)
	if err != nil {
		return false, 0, 0, err
	}
	if sep > 0 {
		if blend {
			errP += sep / 2 // errP is d²/4 + (Err_par + Err_chain)/2
		} else {
			errP += sep
		}
		score = sc.scoreOf(sc.dirErr-errP-margin, 2)
		if !(score > best) {
			return false, 0, 0, nil
		}
	}
	sc.parCand = cand{b: [3]graphidx.EntityID{b1, b2}, m: 2}
	sc.parMid = blend
	if blend {
		for v, p := range bestDist {
			sc.parDist[v] = (sc.parDist[v] + p) / 2
		}
	}
	sc.parSup = est.Support
	return true, errP, score, nil
}

// inheritedBias returns the larger separation bias of the one-bridge
// chains s → b1 → t and s → b2 → t (the model's PendingBias, deferred for
// the call whatever the decision's setting): to first order each route of
// the parallel answer carries the dependence the chain through its bridge
// invents, so a route that a witness shows crossing a common effect
// (docs/QUALITY.md §4f) charges the answer as it charges the chain. 0 for
// models without a deferred separation bias. It overwrites the workspace's
// estimate buffers. Cost: two chain estimates and their separation checks
// (pair look-ups memoised in the decision), only for a parallel answer that
// would otherwise win.
func (sc *scratch) inheritedBias(b1, b2 graphidx.EntityID) (float64, error) {
	pb, ok := sc.model.(scorer.PendingBiaser)
	if !ok {
		return 0, nil
	}
	sc.ws.DeferSeparation(true)
	defer sc.ws.DeferSeparation(deferSeparation)
	sep := 0.0
	for _, b := range [2]graphidx.EntityID{b1, b2} {
		if _, err := sc.model.Chain(sc.ws, sc, sc.s, sc.u, []graphidx.EntityID{b}, sc.t); err != nil {
			return 0, err
		}
		extra, err := pb.PendingBias(sc.ws, sc)
		if err != nil {
			return 0, err
		}
		sep = max(sep, extra)
	}
	return sep, nil
}

// checked reports whether the best chain's separation check read a
// witness other than the two bridges (sc.bestWit): then the check had a
// table to catch a missed route and the chain is not charged for one.
// The other bridge is no such witness: it reaches the target by a route of
// its own, which the one-sided witness test ignores (docs/QUALITY.md §4d).
func (sc *scratch) checked(b1, b2 graphidx.EntityID) bool {
	for _, w := range sc.bestWit {
		if w != b1 && w != b2 {
			return true
		}
	}
	return false
}
