package scorer

import (
	"math"

	"github.com/hopwise/hopwise/graphidx"
)

// GainMarginer is an optional interface of a Model: a chain whose error
// carries a bias estimated against a reference (ReferenceBias) may replace
// the direct answer only when its gain exceeds GainMargin(chainVar, refVar),
// the noise of that estimate. The router subtracts the margin from a chain's
// score (never from its reported gain). *Bayes implements it.
type GainMarginer interface {
	GainMargin(chainVar, refVar float64) float64
}

// ReferenceProjector is an optional interface of a Model whose answers
// carry a bound on how far the truth lies from the target's marginal:
// ProjectReference moves a reference chain's estimate ref of t given s = u
// (in place) to the nearest point that the bound allows, before the router
// measures other chains' bias against it (ReferenceBias). The router calls
// it with the workspace and statistics of the query's last Chain call.
// *Bayes implements it.
type ReferenceProjector interface {
	ProjectReference(ws *Workspace, st Stats, s graphidx.EntityID, u int, t graphidx.EntityID, ref []float64) error
}

// PendingBiaser is an optional interface of a Model whose Chain can defer
// a bias term that is ≥ 0 (Workspace.DeferSeparation): PendingBias returns
// the term of the last Chain call made with ws. *Bayes implements it.
type PendingBiaser interface {
	PendingBias(ws *Workspace, st Stats) (float64, error)
}

var (
	_ GainMarginer  = (*Bayes)(nil)
	_ PendingBiaser = (*Bayes)(nil)
)

// GainMargin returns k·√2·(chainVar + refVar) (k = WithNoiseK), or 0 when k
// is 0 or an input is not a finite non-negative number.
//
// Why: the router charges a chain the bias estimate ‖p̂_c − p̂_ref‖² (see
// ReferenceBias). When the chain is unbiased, p̂_c − p̂_ref is noise with
// covariance ≈ Σ_c + Σ_ref, so the estimate has mean tr(Σ_c + Σ_ref) and, for
// a Gaussian difference concentrated in one direction (binary targets),
// standard deviation √2·tr(Σ_c + Σ_ref) (a scaled χ² with one degree of
// freedom; common practice). Its realisations near 0 make a well-supported
// pair look improvable by a chain when the gain is only noise. Requiring the
// gain to exceed k standard errors removes those chains; k is fitted on the
// fit worlds (internal/eval Fit). The margin is ≥ 0, so the router's pruning
// bounds (score ≤ E_direct − β·m) stay valid. O(1).
func (b *Bayes) GainMargin(chainVar, refVar float64) float64 {
	if b.noiseK == 0 || !(chainVar >= 0) || !(refVar >= 0) || math.IsInf(chainVar+refVar, 0) {
		return 0
	}
	return b.noiseK * math.Sqrt2 * (chainVar + refVar)
}
