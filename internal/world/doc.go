// Package world provides synthetic worlds with exact ground truth for
// evaluating hopwise: discrete Bayesian networks, exact inference by variable
// elimination, context samplers that observe only a neighbourhood of each
// joint sample, held-out pairs that never co-occur, and a JSONL corpus writer
// in the format read by corpus.NewJSONLReader.
//
// The pieces (docs/DESIGN.md, Testbed):
//
//   - Generate draws a random sparse DAG with Beta(0.2, 0.2) CPT rows;
//     New builds a world from explicit variables and CPTs; Greenhouse builds
//     the invented greenhouse scenario of the demo; Asia, Survey, Cancer,
//     Burglary, Sprinkler and Student are published networks typed in with
//     their sources (external checks; PublishedHeldOut holds out every pair
//     at a given skeleton distance).
//   - Posterior, Joint, JointMarginal, MutualInformation and TrueConditional
//     are exact, by variable elimination over the ancestral set of the query
//     with a greedy min-fill order.
//   - NewSampler, Sample and WriteCorpus draw contexts under a Condition:
//     local (a ball of random radius in the skeleton, with dropout), full, or
//     wrong locality (a ball in a different random graph). Held-out pairs
//     (PickHeldOut, WithHeldOut) are never observed together.
//   - MinimalSeparatorPath gives the ideal bridges of a query, RandomBridges
//     the negative control, TrueChain the exact value of a chained estimate.
//
// Variable v has values 0..Card(v)−1 whose labels are in ascending byte
// order, so value indexes agree with those a locality index assigns.
//
// Concurrency: a *World is immutable after construction and safe for
// concurrent use; its inference cache is guarded by a mutex. A *Sampler is
// not safe for concurrent use: give each goroutine its own, with its own seed.
// All randomness comes from PCG streams of explicit seeds.
package world
