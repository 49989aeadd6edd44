// Package scorer turns locality-index statistics into estimates and expected
// errors for direct answers and for answers chained through bridge entities.
//
// Concurrency: models are immutable after construction and safe for
// concurrent use; per-call scratch space comes from a Workspace that must not
// be shared between goroutines.
package scorer
