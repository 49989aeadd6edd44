// Package traceset loads what `hopwise tune` and `hopwise ab` analyse:
// the decision spans of one or more OTLP JSON Lines trace files (read by
// otelx.ReadTraceFiles, duplicates dropped and counted), joined by unit key
// with their outcomes, taken from the outcome spans of the same files or
// from a plain outcomes JSONL file (otelx.ReadOutcomeFile).
//
// Nothing is dropped silently: Set carries the read statistics (lines,
// spans, failed decisions, duplicate spans) and the join statistics
// (decisions without key or outcome, outcomes without decision). Cost
// O(total file size) time, O(decisions + outcomes) memory.
//
// Concurrency: Load keeps no state between calls and concurrent calls are
// safe; a Set is read-only once returned and may be shared by concurrent
// readers (abreport.Compare, tuner).
package traceset
