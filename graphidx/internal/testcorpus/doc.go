// Package testcorpus holds the test fixtures that the tests of graphidx and
// of graphidx/corpus share: a seeded JSONL benchmark corpus (JSONL), the
// process CPU clock (CPUTime) and the alternating measuring loop of the
// benchmarks that compare against a baseline (Alternate). It imports neither package, so the internal
// tests of both can use it (internal/testgraph, the fixtures of the packages
// above graphidx, imports graphidx).
//
// Concurrency: the functions keep no state and are safe for concurrent use.
package testcorpus
