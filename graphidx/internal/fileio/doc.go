// Package fileio holds the file primitives graphidx, graphidx/corpus and
// graphidx/counts share: read-only memory maps of untrusted files (MapFile, with an aligned
// read fallback where mmap is unsupported), durable renames (SyncDir),
// private spill directories whose leftovers from killed processes are
// removed (MakeSpillDir, RemoveDeadOwners, ProcessAlive), and the bounded
// line reader of the corpus readers and the lexicon (LineReader).
//
// Concurrency: the functions keep no state and are safe for concurrent use;
// a mapping is immutable, and its release function must be called once,
// after the last read of the mapped bytes. A LineReader is not safe for
// concurrent use.
package fileio
