// Package demo runs the end-to-end tour behind `hopwise demo` on the invented
// greenhouse world (internal/world.Greenhouse).
//
// The measurement is the eval harness's (internal/eval): eval.Prepare samples
// a corpus of local contexts and builds the index with the real builder, and
// Bench.Answer scores the direct, chained, routed, ideal-scaffold,
// negative-control and support-only estimates of every held-out (far-apart)
// and supported query against the exact conditionals. For a query with exact
// answer p over the K values of the target and an estimate p̂, the error is
// (1/K) Σ_v (p̂_v − p_v)²; a table cell is the mean over the set's queries
// (eval.MSEDefinition).
//
// The demo then routes the same queries again through a router configured as
// the harness's and wrapped in otelx instrumentation exporting to an OTLP JSON
// Lines file (otelx/otlpfile), keeps a few decisions to explain with their
// bridges and exact answers, and writes the harness's plot of error by route.
// The traced pass must agree with the harness (same queries, same modes); the
// tests check it.
//
// Cost: sampling is O(contexts × context size), the build O(Σ n²) over
// contexts of n observations, and each query one bounded router search plus
// cached exact inference. The default (100 000 contexts) runs in a few
// seconds on 2 cores.
//
// Concurrency: Run is safe to call concurrently with distinct directories.
package demo
