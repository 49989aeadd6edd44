// Package beamjob counts a JSONL corpus into count shards on Apache Beam,
// so that the locality index of a corpus too large for one machine can be
// built on Flink, Spark or Dataflow (or locally on prism, Beam's embedded
// runner), then compiled with counts.CompileCounts or
// `hopwise build --from-counts DIR`.
//
// It is a nested Go module so that the core hopwise module does not depend
// on Beam. It reuses the core's line parser (corpus.JSONLLineParser), its
// counting (counts.Partial) and its count-shard format
// (counts.WriteCountShard, specified in graphidx/COUNTS.md): the index
// compiled from the shards is byte-identical to graphidx.Build on the same
// corpus. See README.md for running it locally and on clusters.
package beamjob
