package router

import (
	"math"

	"github.com/hopwise/hopwise/scorer"
)

// shrinkCharged turns on shrinkCharged's correction (shrink); a test switch.
var shrinkCharged = true

// shrink moves the answer of a best chain that a witness on the observed
// entity's side charged (sc.bestSep, the part of its separation bias those
// witnesses account for, scorer.Workspace.SeparationPrevShare) toward the
// target's marginal by the bias the witness measured (docs/QUALITY.md §4g).
// Such a witness w, moved by s = u's side, reaches the target only through
// the chain's route, and the table (w, t) shows less of the shift than the
// route claims: the chain's deviation from the marginal m, D = ‖p̂_c − m‖²,
// holds an invented part of squared size S along it. The answer is
//
//	p̂ = p̂_c + √(S/D)·(m − p̂_c),
//
// √S nearer the marginal (S ≤ D: the check caps its bias at D). Its error
// is left at the chain's charged Err = E_0 + S: if the witness is right (a
// bias of √S along the deviation) the shrunk answer expects E_0, if it is
// noise (no bias) E_0 + S, so E_0 + S covers both (and every bias up to
// 2√S along the deviation); the score and the decision are unchanged.
// Only for a pair never observed together, whose direct estimate sc.ddist
// is the target's smoothed marginal (scorer.Bayes.Direct). The share S
// is known apart only with the separation bias deferred (chainScore),
// which production always does; under the test switch deferSeparation =
// false the bias sits inside the chain's Err and nothing moves. O(K), no
// look-up.
func (sc *scratch) shrink(dirSupport uint64) {
	if !shrinkCharged || dirSupport > 0 || !(sc.bestSep > 0) {
		return
	}
	if len(sc.ddist) != len(sc.dist) {
		return
	}
	d2 := scorer.ReferenceBias(sc.dist, sc.ddist) // D
	if !(d2 > 0) {
		return
	}
	f := math.Sqrt(min(1, sc.bestSep/d2))
	for v, p := range sc.ddist {
		sc.dist[v] += f * (p - sc.dist[v])
	}
}
