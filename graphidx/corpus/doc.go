// Package corpus reads corpora for the locality index: it turns JSON Lines,
// CSV and plain text (with a lexicon) into the stream of contexts that
// graphidx.Build counts (a graphidx.ContextReader), with every bad line
// either a context or a counted, named bad line. That is its one job; the
// index, the builder and the lexicon are package graphidx, which this
// package imports and which never imports it.
//
// The formats are one table (Formats): a Format gives the name, the file
// extensions, the help lines and the constructor of a reader, and
// DetectFormat, Open and `hopwise build` all read it, so adding a format
// means adding one entry and a reader.
//
// Bad input. Every reader validates every context it returns (names, values
// and ids pass graphidx.CheckName, no entity twice, at most
// graphidx.WithMaxContextEntities entities) and reports a bad line as a
// *graphidx.LineError naming the file, the line, the field and a stable
// graphidx.Reason* code. Under graphidx.Lenient (the default) the line is
// skipped and counted in graphidx.ReadStats (Stats), which always reconciles
// (Records == OK + Empty + Σ Skipped); under graphidx.Strict the first bad
// line is the error. Lines longer than WithMaxLineBytes are skipped in
// constant memory, and the CSV reader groups rows within
// graphidx.WithMemBudget, spilling sorted runs to graphidx.WithTempDir.
//
// Options. The readers take graphidx.ReadOption: the options graphidx shares
// with the builder (WithPolicy, WithMemBudget, WithTempDir,
// WithMaxContextEntities), so one list configures both, and this package's
// WithMaxLineBytes and WithLexicon.
//
// Concurrency: a reader is not safe for concurrent use; use one per
// goroutine (the builder parallelises internally). JSONLLineParser parses
// lines already split, one parser per goroutine.
package corpus
