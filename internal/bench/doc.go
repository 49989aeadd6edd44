// Package bench measures the router against its performance targets: a
// seeded power-law locality-graph generator (Chung–Lu), two baseline
// searches with the same scoring and bounds (nested Go maps keyed by entity
// name, and gonum's graph/simple), and a harness that runs the
// router and the baselines on the same queries in one process and reports
// latency percentiles, allocations, throughput scaling, speed ratios,
// the agreement of the best chains, and a hub-attack measurement.
//
// Concurrency: a Graph is immutable after NewGraph and safe for concurrent
// use; every ContextReader it returns is for one goroutine. Baselines are
// safe for concurrent Decide calls. Run is not meant to be called
// concurrently with itself (it measures throughput with all cores).
package bench
