// Package scorer turns locality-index statistics into estimates and expected
// errors for direct answers and for answers chained through bridge entities.
//
// Two models implement Model:
//
//   - Bayes, for valued corpora: Dirichlet posteriors of the local
//     conditionals (Gelman et al., BDA 3rd ed. §2.4, §3.4), a chained
//     estimate p̂ = e_uᵀ M_1…M_(m+1) built with gonum/mat, its delta-method
//     (or exact-moment) variance, a per-hop squared bias β·m and a
//     missing-signal bias γ·(δ − L)₊² for chains whose signal L (the product
//     of the edges' association lower bounds) is too weak to detect.
//   - Support, for presence-only corpora: err(edge) = v0/(support + n0),
//     err(chain) = Σ_edges err(edge) + β·m.
//
// Model.EdgeCost is the additive proxy the router uses to generate chain
// candidates: for Bayes a signal-loss cost, −log of a lower confidence bound
// of Cramér's V of the pair table (the max-signal chain is the cheapest, as
// in Chow & Liu 1968); for Support the edge error v0/(support + n0).
// ReferenceBias is the squared distance of a chain's estimate from a
// reference estimate, which the router adds to a chain's error as its bias.
//
// Combine merges independent chains by inverse-error weighting. FitSupport,
// FitHopBias and FitChainBias calibrate v0, n0, β and γ by least squares on
// realised squared errors (for example from the synthetic worlds).
//
// The scorer reads statistics through the small Stats interface, which
// *graphidx.Index satisfies. Value indexes follow each entity's value labels
// in ascending byte order.
//
// Concurrency: models are immutable after construction and safe for
// concurrent use; per-call scratch space comes from a Workspace that must not
// be shared between goroutines.
package scorer
