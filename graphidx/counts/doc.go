// Package counts holds the mergeable co-occurrence counts of a corpus and
// their on-disk form, the count shards: Partial (the in-memory, name-keyed
// counts and their cells, CountCell), the shard file format (COUNTS.md:
// WriteCounts, WriteCountShards, DecodeCountShard, ReadCounts), the
// compilers that turn one or several count sets into a graphidx.Source
// (CompileCounts, MergeCounts) and the identity of a count set (CountSetID,
// CheckDistinctCountSets). Its one job is counting apart from indexing:
// counts are plain sums, so shards counted on different machines or days
// merge into the Source that graphidx.Build would give on the whole corpus,
// pruned identically (graphidx.PlanPrune).
//
// counts imports graphidx (its Context, Source, BuildOption and errors);
// graphidx never imports counts.
//
// Concurrency: a Partial is not safe for concurrent use (count into one
// Partial per goroutine and Merge them). The shard functions keep no state
// and may run concurrently on distinct directories; writing the same
// directory from two goroutines is not supported. The Source returned by
// CompileCounts and MergeCounts is not safe for concurrent Pairs calls (it
// reuses its table buffers); close it once, after the last Pairs call.
package counts
