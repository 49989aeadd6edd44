// Package graphidx provides the locality index: an immutable, versioned,
// memory-mapped file of entities, their values and marginal counts, and the
// co-occurrence statistics of every observed pair, together with the corpus
// readers and the builder that produce it. The mergeable counts and their
// shard files live in graphidx/counts, which imports this package.
//
// Text: a Lexicon (see docs/LINKING.md) maps surface forms to entities and
// optionally to their values; the text reader observes what it finds in each
// paragraph, and Lexicon.Link finds the mentions of a prompt.
//
// Concurrency: an opened *Index is read-only and safe for concurrent use by
// any number of goroutines until Close, and so is a loaded *Lexicon. Corpus
// readers are not safe for concurrent use; the builder parallelises
// internally.
package graphidx
