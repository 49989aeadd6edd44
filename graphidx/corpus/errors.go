package corpus

import "errors"

// Sentinel errors of Open and the readers. A bad line is not one of them: it
// is a *graphidx.LineError naming the file, the line, the field and a
// graphidx.Reason* code (skipped and counted under graphidx.Lenient,
// returned under graphidx.Strict).
var (
	// ErrUnknownFormat is returned by Open when the format is neither given
	// nor detectable from the file name, or is not one of the Format* names.
	ErrUnknownFormat = errors.New("graphidx: unknown corpus format")
	// ErrLexiconRequired is returned by Open for a format that needs a
	// lexicon (text) when none is given, and by TextReader.Next when the
	// reader was made with a nil lexicon.
	ErrLexiconRequired = errors.New("graphidx: a text corpus needs a lexicon: pass --lexicon FILE.tsv (lines: surface form<TAB>entity id[<TAB>value])")
)
