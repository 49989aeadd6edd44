// Package atomicfile writes a small file so that a reader sees the old file
// or the new one, never a part: the content goes to a temporary file in the
// same directory, which is synced, closed and renamed over the target. It is
// for configuration files and plots; the index writer has its own, streaming
// version of the same steps. Safe for concurrent use on different paths.
package atomicfile
