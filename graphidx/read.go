package graphidx

import (
	"fmt"
	"strings"
	"unicode/utf8"
)

// This file holds what the builder and the lexicon share with the corpus
// readers of graphidx/corpus: the context a reader returns, the line error
// and its reason codes, the line accounting, the bad-line policy and the
// reader settings that Build shares (WithPolicy, WithMemBudget, WithTempDir,
// WithMaxContextEntities). The readers themselves live in graphidx/corpus,
// which imports this package.

// Observation is one entity observed with one value inside a context.
// Presence-only corpora use the value PresentValue.
type Observation struct {
	Entity, Value string
}

// Context is one unit of a corpus (a document, a chunk, a record) and the
// observations it makes at once. ID is used in error messages and progress
// only; the builder does not require IDs to be unique.
type Context struct {
	ID  string
	Obs []Observation
}

// ContextReader streams the contexts of a corpus: what Build and Compile
// consume. The readers of graphidx/corpus implement it, and so can any other
// source of contexts.
//
// Next returns the next context, or io.EOF after the last one. The readers of
// graphidx/corpus validate every context they return: names and values are non-empty,
// valid UTF-8, at most MaxNameBytes long, and no entity appears twice. The
// returned Obs slice may be reused by the following call to Next; copy it to
// keep it (the strings themselves are immutable and may be kept).
type ContextReader interface {
	Next() (Context, error)
}

// MaxNameBytes is the longest entity name, value label or context id the
// corpus readers and the lexicon accept, in bytes.
const MaxNameBytes = 4096

// Reason codes of LineError, for the corpus readers (graphidx/corpus) and
// the lexicon alike. They are stable identifiers, safe to match on and to
// aggregate in reports (ReadStats.Skipped is keyed by them).
const (
	// ReasonBadJSON: the line is not one well-formed JSON object.
	ReasonBadJSON = "bad-json"
	// ReasonMissingID: the context id is absent or empty.
	ReasonMissingID = "missing-id"
	// ReasonEmptyContext: a JSONL context with neither observations nor
	// entities ({"id":"c","obs":{}} or no "obs"/"ents" key at all).
	ReasonEmptyContext = "empty-context"
	// ReasonBadField: a field has the wrong JSON type (id not a string, obs
	// not an object of strings, ents not an array of strings) or a key is
	// repeated.
	ReasonBadField = "bad-field"
	// ReasonMixedForms: one JSONL line has both "obs" and "ents".
	ReasonMixedForms = "mixed-forms"
	// ReasonDuplicateEntity: an entity appears twice in one context, with
	// the same or a different value.
	ReasonDuplicateEntity = "duplicate-entity"
	// ReasonEmptyName: an entity name or value label is the empty string.
	ReasonEmptyName = "empty-name"
	// ReasonNameTooLong: a name, value or id is longer than MaxNameBytes.
	ReasonNameTooLong = "name-too-long"
	// ReasonBadUTF8: a name, value or id is not valid UTF-8, or a JSON
	// string escapes a lone UTF-16 surrogate (\ud800 without its pair),
	// which would otherwise decode to U+FFFD and merge distinct names.
	ReasonBadUTF8 = "bad-utf8"
	// ReasonControlChar: a name, value or id contains a control character
	// (U+0000–U+001F, U+007F or U+0080–U+009F), which could rewrite a
	// terminal when the name is printed.
	ReasonControlChar = "control-char"
	// ReasonTooManyEntities: a context names more entities than the
	// reader's limit (WithMaxContextEntities); its n(n−1)/2 pairs would
	// dominate the build.
	ReasonTooManyEntities = "too-many-entities"
	// ReasonLineTooLong: a line or paragraph is longer than the reader's limit.
	ReasonLineTooLong = "line-too-long"
	// ReasonTooManyColumns: a CSV row has more fields than the header.
	ReasonTooManyColumns = "too-many-columns"
	// ReasonTooFewColumns: a CSV row has fewer fields than the header.
	ReasonTooFewColumns = "too-few-columns"
	// ReasonBadQuote: a CSV field has a stray or unterminated quote.
	ReasonBadQuote = "bad-quote"
	// ReasonBadHeader: the CSV header is not context,entity,value (or
	// context,entity). Always fatal, also in lenient mode.
	ReasonBadHeader = "bad-header"
	// ReasonConflictingValues: a text paragraph states two different values
	// of one entity (through two lexicon forms with values). The paragraph
	// is a bad record: skipped and counted in lenient mode, an error in
	// strict mode.
	ReasonConflictingValues = "conflicting-values"
)

// LineError reports one bad corpus line: the file, the 1-based line number,
// the field at fault (empty when the whole line is bad), a reason code from
// the Reason* constants and an optional human detail.
type LineError struct {
	File   string
	Line   int
	Field  string
	Reason string
	Detail string
}

// Error formats the error as "file:line: field: reason[: detail]". Control
// characters in the field and detail (which may quote corpus names) are
// escaped, so printing the error cannot drive a terminal.
func (e *LineError) Error() string {
	var b strings.Builder
	if e.Line > 0 {
		fmt.Fprintf(&b, "%s:%d: ", EscapeControl(e.File), e.Line)
	} else { // no line: an empty file, or a line parsed alone (JSONLLineParser)
		fmt.Fprintf(&b, "%s: ", EscapeControl(e.File))
	}
	if e.Field != "" {
		b.WriteString(EscapeControl(e.Field))
		b.WriteString(": ")
	}
	b.WriteString(e.Reason)
	if e.Detail != "" {
		b.WriteString(": ")
		b.WriteString(EscapeControl(e.Detail))
	}
	return b.String()
}

// isControl reports the C0 controls, DEL and the C1 controls.
func isControl(r rune) bool { return r < 0x20 || (r >= 0x7f && r <= 0x9f) }

// EscapeControl returns s with every control character (U+0000–U+001F,
// U+007F, U+0080–U+009F) and every invalid UTF-8 byte written as a Go
// escape (\x1b, \u009b, \xff), and s itself when it has none, without
// allocating. Use it wherever a name from a corpus, an index or a query is
// printed for a person: the corpus readers reject such names, but
// an index written by another tool, or a query, may still carry them.
// O(len(s)).
func EscapeControl(s string) string {
	clean := true
	for _, r := range s {
		if isControl(r) || r == utf8.RuneError {
			clean = false
			break
		}
	}
	if clean {
		return s
	}
	var b strings.Builder
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		switch {
		case r == utf8.RuneError && n <= 1:
			fmt.Fprintf(&b, "\\x%02x", s[i])
		case r < 0x80 && isControl(r):
			fmt.Fprintf(&b, "\\x%02x", r)
		case isControl(r):
			fmt.Fprintf(&b, "\\u%04x", r)
		default:
			b.WriteString(s[i : i+n])
		}
		i += n
	}
	return b.String()
}

// BadLinePolicy says what a reader does with a bad line.
type BadLinePolicy int

const (
	// Lenient skips a bad line, counts it by reason and goes on. It is the
	// default.
	Lenient BadLinePolicy = iota
	// Strict stops at the first bad line and returns its *LineError.
	Strict
)

// ReadStats are the line accounting of a reader. Records counts the units
// the reader examined (JSONL non-blank lines, CSV data rows, text
// paragraphs) and always reconciles:
//
//	Records == OK + Empty + Σ Skipped
//
// Blank lines, the CSV header and lexicon lines are not records.
type ReadStats struct {
	Lines    int64            // physical lines consumed
	Records  int64            // records examined
	OK       int64            // records accepted
	Empty    int64            // text paragraphs without an observation (not an error)
	Skipped  map[string]int64 // records rejected in lenient mode, by reason code
	Contexts int64            // contexts returned by Next
	// FirstBad holds the first LineError seen for each skipped reason.
	FirstBad map[string]*LineError
	// Unvalued counts, for text, valued entities left out of a paragraph
	// that names them only by forms without a value (see corpus.TextReader).
	Unvalued int64
}

// SkippedTotal is the number of rejected records over all reasons.
func (s ReadStats) SkippedTotal() int64 {
	var n int64
	for _, v := range s.Skipped {
		n += v
	}
	return n
}

// StatsReader is implemented by readers that account for their lines. All
// readers of graphidx/corpus implement it; Build copies the stats into its
// BuildSummary.
type StatsReader interface {
	Stats() ReadStats
}

// Positioner is implemented by a ContextReader that can name the file and
// the 1-based line of the context Next returned last; Build then names that
// place in the errors it finds after reading a context (too many values,
// a context over WithMaxContextEntities). The JSONL and CSV readers of
// graphidx/corpus implement it.
type Positioner interface {
	Position() (file string, line int)
}

// TransientReader is implemented by a ContextReader that can return names
// and values as views into its own buffer, valid only until the next call
// to Next, instead of strings of their own. Build, which copies every
// string it keeps, turns views on while it reads (SetTransient(true)) and
// off when done, saving the reader a map look-up per observation; other
// callers leave them off. The JSONL reader of graphidx/corpus implements it.
type TransientReader interface {
	SetTransient(on bool)
}

// ReadSettings are the settings of a corpus reader that Build shares: the
// options WithPolicy, WithMemBudget, WithTempDir and WithMaxContextEntities
// set them on a reader (through ReadOption) and on the builder alike. The
// readers of graphidx/corpus read them with NewReadSettings.
type ReadSettings struct {
	// Policy is the bad-line policy (Lenient by default).
	Policy BadLinePolicy
	// MemBudget bounds the memory the reader holds of its own (the CSV
	// reader's row groups), in bytes; DefaultMemBudget by default.
	// WithMemBudget raises a positive budget below 64 KiB to 64 KiB, since a
	// reader cannot fail at construction.
	MemBudget int64
	// TempDir is where the reader spills (os.TempDir() when empty).
	TempDir string
	// MaxContextEntities is the most entities one context may have (0: no
	// limit); DefaultMaxContextEntities by default.
	MaxContextEntities int
}

// ReadOption configures a corpus reader. The SharedOptions of this package
// (WithPolicy, WithMemBudget, WithTempDir, WithMaxContextEntities) set
// ReadSettings; graphidx/corpus adds options of its own readers, which
// leave ReadSettings alone and which its readers recognise by type.
type ReadOption interface {
	ApplyRead(*ReadSettings)
}

// NewReadSettings returns the default settings with opts applied in order;
// nil options are skipped. O(len(opts)).
func NewReadSettings(opts ...ReadOption) ReadSettings {
	s := ReadSettings{Policy: Lenient, MemBudget: DefaultMemBudget, MaxContextEntities: DefaultMaxContextEntities}
	for _, o := range opts {
		if o != nil {
			o.ApplyRead(&s)
		}
	}
	return s
}

type policyOption BadLinePolicy

func (o policyOption) ApplyRead(s *ReadSettings) { s.Policy = BadLinePolicy(o) }
func (o policyOption) applyBuild(c *buildConfig) { c.strict = BadLinePolicy(o) == Strict }

// WithPolicy sets the bad-line policy of a reader (Lenient by default). Given
// to Build, Strict makes a context over WithMaxContextEntities an error
// rather than a counted skip.
func WithPolicy(p BadLinePolicy) SharedOption { return policyOption(p) }

// CheckName applies the name rule of the corpus readers and the lexicon to
// one entity name, value label or context id: it returns "" for a valid
// name, else the reason code (ReasonEmptyName, ReasonNameTooLong,
// ReasonBadUTF8 or ReasonControlChar). A valid name is non-empty, at most
// MaxNameBytes long, valid UTF-8 and free of control characters (U+0000–
// U+001F, U+007F, U+0080–U+009F). O(len(s)): one pass over ASCII names;
// from the first non-ASCII byte on, the rest is validated as UTF-8 and
// scanned for C0, DEL and C1 (0xC2 0x80–0x9F) controls.
func CheckName(s []byte) string {
	switch {
	case len(s) == 0:
		return ReasonEmptyName
	case len(s) > MaxNameBytes:
		return ReasonNameTooLong
	}
	for i, c := range s {
		if c < 0x20 || c == 0x7f {
			return ReasonControlChar
		}
		if c < 0x80 {
			continue
		}
		rest := s[i:]
		if !utf8.Valid(rest) {
			return ReasonBadUTF8
		}
		for j, d := range rest {
			if d < 0x20 || d == 0x7f || (d == 0xc2 && j+1 < len(rest) && rest[j+1] <= 0x9f) {
				return ReasonControlChar
			}
		}
		return ""
	}
	return ""
}
