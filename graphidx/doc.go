// Package graphidx provides the locality index: an immutable, versioned,
// memory-mapped file of entities, their values and marginal counts, and the
// co-occurrence statistics of every observed pair, together with the builder
// that counts a stream of contexts into it and the lexicon that finds
// entities in text. That is its one job, in three parts: the builder
// (Build, Compile, WriteFile), the file format and its reader (Open, Index,
// FORMAT.md) and the lexicon (ParseLexicon, Lexicon.Link).
//
// Around it: the corpus readers (JSONL, CSV, text with a lexicon) and the
// format table live in graphidx/corpus, and the mergeable counts and their
// shard files in graphidx/counts; both import this package, never the
// reverse. What they share with the builder is here (read.go): the
// Context a reader returns, ContextReader, LineError and its Reason* codes,
// ReadStats, the bad-line policy and the options that configure a reader and
// the builder alike (SharedOption: WithPolicy, WithMemBudget, WithTempDir,
// WithMaxContextEntities).
//
// Text: a Lexicon (see docs/LINKING.md) maps surface forms to entities and
// optionally to their values; Lexicon.Link finds the mentions of a prompt,
// and a Matcher those of many texts (the text corpus reader's paragraphs).
//
// Concurrency: an opened *Index is read-only and safe for concurrent use by
// any number of goroutines until Close, and so is a loaded *Lexicon. A
// Matcher is not; use one per goroutine. The builder parallelises
// internally.
package graphidx
