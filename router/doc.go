// Package router decides, per query, whether to answer directly or through a
// bounded chain of bridge entities, by the estimated error reduction.
//
// Concurrency: a *Router is safe for concurrent use. Decide never blocks on
// Swap; the index swap is a single atomic pointer store.
package router
