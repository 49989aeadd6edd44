// Package router decides, per query, whether to answer directly or through a
// bounded chain of bridge entities, by the estimated error reduction.
//
// A Router reads a locality index through the Graph interface
// (*graphidx.Index satisfies it) and scores estimates with a scorer.Model
// (Bayes by default). For a query "To given From = Value" Decide
//
//  1. estimates the direct answer and its expected error E_direct;
//  2. searches chains of at most H bridges (search.go: an exact one-bridge
//     intersection, then meet-in-the-middle beams of width B joined on shared
//     nodes), ranks them by an additive edge-cost proxy (for the Bayes model
//     the signal each edge loses), keeps the k best and scores those
//     exactly: E_chain = Σ Var + β·m + the squared distance of the chain's
//     estimate from a reference (the direct estimate when the pair was ever
//     observed together, else the proxy-best chain's), so that weak chains
//     whose estimates drift toward the target's marginal are not preferred
//     for their small variance;
//  3. routes by gain = E_direct − E_chain (or the utility λ·gain − c_hop·m):
//     chain when the score is ≥ τ, else direct, subject to the unit's A/B arm
//     and optional exploration.
//
// The Decision carries both estimates, the gain, a stable reason code, the
// index generation and whether a bound (beam, candidates, expansion budget,
// deadline) truncated the search.
//
// # Concurrency
//
// A *Router is safe for concurrent use. Decide never blocks on Swap,
// Reconfigure or Close: the index and the configuration are single atomic
// pointers. Each index is held through a reference-counted handle; a swapped
// out index is closed (io.Closer) exactly once, after the last in-flight
// decision that uses it returns. The router owns the graphs it is given.
//
// # Cache
//
// Search results are cached in a sharded golang-lru/v2 cache keyed by
// (From, Value, To, swap counter, index generation, configuration
// generation), so a new index or configuration never serves stale entries.
// The arm, threshold and exploration policy is applied after the cache, so
// a hit costs a few hundred nanoseconds and does not allocate. Slices in a
// returned Decision may be shared with the cache and other callers and must
// not be modified; they never point into index memory.
//
// # A/B and exploration
//
// With WithArms, units are assigned to the direct-only, routed and
// chain-always arms by SipHash-2-4 of Query.Key under a 128-bit key
// (WithHashKey), never by trace ids. With WithExploration(ε), the routed arm
// takes the non-preferred mode with probability ε by a second keyed draw,
// and Decision.Propensity records the probability of the mode chosen
// (1−ε or ε; 1 when only one mode is possible).
//
// # Configuration file
//
// Config is the JSON form of the options (LoadConfig, SaveConfig); see its
// documentation for the fields. `hopwise route --config` reads it and
// `hopwise tune` writes it.
package router
