// Package demo runs the end-to-end tour behind `hopwise demo` on the invented
// greenhouse world (internal/world.Greenhouse): it samples a corpus of local
// contexts, builds a locality index with the real builder, routes every
// held-out (far-apart) and well-supported query through a router.Router
// instrumented by otelx, and measures the direct, chained and routed
// estimates against the exact conditionals of the world.
//
// Error measure. For a query (s = u, t) with exact conditional p = P(t | s=u)
// over the K values of t and an estimate p̂, the squared error is
//
//	e(p̂) = (1/K) Σ_v (p̂_v − p_v)²
//
// (for binary t this is (p̂_1 − p_1)²), and a table cell is the mean of e over
// the queries of its set: the mean squared error (MSE). "Chained" is the best
// chain's estimate when the router found one and the direct estimate
// otherwise (what an always-chain policy answers); "routed" is the estimate
// of the mode the router chose.
//
// Cost: sampling is O(contexts × context size), the build O(Σ n²) over
// contexts of n observations, and routing one query is one bounded search
// (router package). Exact truth is one cached variable elimination per
// (from, value, to).
//
// Concurrency: Run is safe to call concurrently with distinct directories.
package demo
