// Package fileio holds the file primitives graphidx and graphidx/counts
// share: read-only memory maps of untrusted files (MapFile, with an aligned
// read fallback where mmap is unsupported) and durable renames (SyncDir).
//
// Concurrency: the functions keep no state and are safe for concurrent use;
// a mapping is immutable, and its release function must be called once,
// after the last read of the mapped bytes.
package fileio
