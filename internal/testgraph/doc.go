// Package testgraph holds the in-memory fixtures the tests of several
// packages share, so that each exists once:
//
//   - Stats: entity value counts and pair count tables by id, stored in
//     both orientations (a scorer.Stats);
//   - Graph and Builder: a small named graph with adjacency lists and
//     support-ranked neighbours (a router.Graph), which panics when used
//     after Close so that a use-after-retire crashes the test; Random
//     builds a seeded random one;
//   - PowerLaw: a seeded Chung–Lu power-law graph as a graphidx.Source,
//     for benchmark and golden indexes.
//
// It imports only graphidx, so the tests of router, scorer and otelx can
// all use it. Fixtures are built by one goroutine; a built Graph is
// read-only and safe for concurrent use.
package testgraph
