// Package graphidx provides the locality index: an immutable, versioned,
// memory-mapped file of entities, their values and marginal counts, and the
// co-occurrence statistics of every observed pair, together with the corpus
// readers and the builder that produce it.
//
// Concurrency: an opened *Index is read-only and safe for concurrent use by
// any number of goroutines until Close. Corpus readers are not safe for
// concurrent use; the builder parallelises internally.
package graphidx
