package graphidx

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"errors"
	"fmt"
	"io"
	"maps"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"unicode/utf8"

	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

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

// ContextReader streams the contexts of a corpus.
//
// Next returns the next context, or io.EOF after the last one. Readers in this
// package validate every context they return: names and values are non-empty,
// valid UTF-8, at most MaxNameBytes long, and no entity appears twice. The
// returned Obs slice may be reused by the following call to Next; copy it to
// keep it (the strings themselves are immutable and may be kept).
type ContextReader interface {
	Next() (Context, error)
}

// MaxNameBytes is the longest entity name, value label or context id the
// corpus readers accept, in bytes.
const MaxNameBytes = 4096

// DefaultMaxLineBytes is the default limit on one corpus line (JSONL, CSV
// record) or one text paragraph. Longer input is a LineError with reason
// ReasonLineTooLong; the reader skips to the next line in constant memory.
const DefaultMaxLineBytes = 16 << 20

// Reason codes of LineError. They are stable identifiers, safe to match on
// and to aggregate in reports.
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

// trimBOM drops a UTF-8 byte-order mark from the start of a file's first
// line: editors and spreadsheet exports on some systems write one, and it
// is no part of the first name (RFC 8259 §8.1 lets a JSON parser ignore
// it). O(1).
func trimBOM(line []byte) []byte { return bytes.TrimPrefix(line, []byte("\xef\xbb\xbf")) }

// isControl reports the C0 controls, DEL and the C1 controls.
func isControl(r rune) bool { return r < 0x20 || (r >= 0x7f && r <= 0x9f) }

// EscapeControl returns s with every control character (U+0000–U+001F,
// U+007F, U+0080–U+009F) and every invalid UTF-8 byte written as a Go
// escape (\x1b, \u009b, \xff), and s itself when it has none, without
// allocating. Use it wherever a name from a corpus, an index or a query is
// printed for a person: the readers of this package reject such names, but
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
	// that names them only by forms without a value (see TextReader).
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
// readers of this package implement it; Build copies the stats into its
// BuildSummary.
type StatsReader interface {
	Stats() ReadStats
}

// ReadOption configures a corpus reader.
type ReadOption interface{ applyRead(*readConfig) }

type readConfig struct {
	lexicon  *Lexicon
	policy   BadLinePolicy
	maxLine  int
	tempDir  string
	memLimit int64
	// maxCtxEnts is the most entities one context may have (0: no limit).
	maxCtxEnts int
}

func newReadConfig(opts []ReadOption) readConfig {
	c := readConfig{policy: Lenient, maxLine: DefaultMaxLineBytes, memLimit: DefaultMemBudget,
		maxCtxEnts: DefaultMaxContextEntities}
	for _, o := range opts {
		if o != nil {
			o.applyRead(&c)
		}
	}
	return c
}

type policyOption BadLinePolicy

func (o policyOption) applyRead(c *readConfig)   { c.policy = BadLinePolicy(o) }
func (o policyOption) applyBuild(c *buildConfig) { c.strict = BadLinePolicy(o) == Strict }

// WithPolicy sets the bad-line policy of a reader (Lenient by default). Given
// to Build, Strict makes a context over WithMaxContextEntities an error
// rather than a counted skip.
func WithPolicy(p BadLinePolicy) SharedOption { return policyOption(p) }

type maxLineOption int

func (o maxLineOption) applyRead(c *readConfig) {
	if o > 0 {
		c.maxLine = int(o)
	}
}

// WithMaxLineBytes sets the longest accepted line or paragraph in bytes.
// Values ≤ 0 keep DefaultMaxLineBytes.
func WithMaxLineBytes(n int) ReadOption { return maxLineOption(n) }

type readOptionFunc func(*readConfig)

func (f readOptionFunc) applyRead(c *readConfig) { f(c) }

// WithLexicon gives OpenCorpus an already loaded lexicon for a text
// corpus, so a caller can load it once, check its memory (Stats) and read
// the corpus several times. It takes precedence over OpenCorpus's lexicon
// path.
func WithLexicon(l *Lexicon) ReadOption {
	return readOptionFunc(func(c *readConfig) { c.lexicon = l })
}

// withReadMemLimit sets the CSV grouping budget without the lower bound
// (tests force spilling with it).
func withReadMemLimit(n int64) ReadOption {
	return readOptionFunc(func(c *readConfig) { c.memLimit = n })
}

// badLines implements the policy and the accounting shared by the readers.
type badLines struct {
	policy BadLinePolicy
	stats  ReadStats
}

func (b *badLines) init(p BadLinePolicy) {
	b.policy = p
	b.stats.Skipped = map[string]int64{}
	b.stats.FirstBad = map[string]*LineError{}
}

// bad records a rejected record; it returns the error to stop with in strict
// mode and nil in lenient mode.
func (b *badLines) bad(e *LineError) error {
	if b.policy == Strict {
		return e
	}
	b.stats.Skipped[e.Reason]++
	if _, ok := b.stats.FirstBad[e.Reason]; !ok {
		b.stats.FirstBad[e.Reason] = e
	}
	return nil
}

func (b *badLines) snapshot() ReadStats {
	s := b.stats
	s.Skipped = maps.Clone(b.stats.Skipped)
	s.FirstBad = maps.Clone(b.stats.FirstBad)
	return s
}

// Skipped returns the lenient-mode counts of skipped records by reason.
func (b *badLines) Skipped() map[string]int {
	m := make(map[string]int, len(b.stats.Skipped))
	for k, v := range b.stats.Skipped {
		m[k] = int(v)
	}
	return m
}

// checkName validates one name, value or id; it returns a reason code or "".
// One pass over ASCII names; from the first non-ASCII byte on, the rest is
// validated as UTF-8 and scanned for C0, DEL and C1 (0xC2 0x80–0x9F)
// controls.
func checkName(s []byte) string {
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

// dupCheck reports a repeated entity in obs. Up to 32 observations it
// compares cheap fingerprints pairwise (O(n²) integer compares, a string
// compare only on a fingerprint match) and leaves obs in place; longer
// contexts are sorted by entity name (O(n log n)).
func dupCheck(obs []Observation) (string, bool) {
	if len(obs) > 32 {
		sortObs(obs)
		for i := 1; i < len(obs); i++ {
			if obs[i].Entity == obs[i-1].Entity {
				return obs[i].Entity, true
			}
		}
		return "", false
	}
	var h [32]uint64
	for i := range obs {
		h[i] = fingerprint(obs[i].Entity)
		for j := range i {
			if h[j] == h[i] && obs[j].Entity == obs[i].Entity {
				return obs[i].Entity, true
			}
		}
	}
	return "", false
}

// fingerprint mixes a name's length with its first and last 8 bytes. Equal
// names have equal fingerprints; different ones rarely do.
func fingerprint(s string) uint64 {
	n := len(s)
	var a, b uint64
	if n >= 8 {
		a = load64(s)
		b = load64(s[n-8:])
	} else {
		for i := range n {
			a = a<<8 | uint64(s[i])
		}
	}
	return (a*0x9E3779B97F4A7C15 ^ b*0xC2B2AE3D27D4EB4F) + uint64(n)
}

func load64(s string) uint64 {
	_ = s[7]
	return uint64(s[0]) | uint64(s[1])<<8 | uint64(s[2])<<16 | uint64(s[3])<<24 |
		uint64(s[4])<<32 | uint64(s[5])<<40 | uint64(s[6])<<48 | uint64(s[7])<<56
}

// sortObs sorts by entity name; insertion sort for the usual short contexts.
func sortObs(obs []Observation) {
	if len(obs) > 24 {
		slicesSortObs(obs)
		return
	}
	for i := 1; i < len(obs); i++ {
		for j := i; j > 0 && obs[j].Entity < obs[j-1].Entity; j-- {
			obs[j], obs[j-1] = obs[j-1], obs[j]
		}
	}
}

func slicesSortObs(obs []Observation) {
	slices.SortFunc(obs, func(a, b Observation) int { return strings.Compare(a.Entity, b.Entity) })
}

// interner returns shared strings for repeated byte sequences so that the
// readers allocate once per distinct name rather than once per observation.
// It is bounded: when full it starts over.
type interner struct {
	m map[string]string
}

const internCap = 1 << 16

func (in *interner) get(b []byte) string {
	if s, ok := in.m[string(b)]; ok { // no allocation for the lookup
		return s
	}
	if in.m == nil || len(in.m) >= internCap {
		in.m = make(map[string]string, 1024)
	}
	s := string(b)
	in.m[s] = s
	return s
}

// lineReader is the bounded line reader of the corpus readers and the
// lexicon (fileio.LineReader) under the names they use.
type lineReader struct {
	fileio.LineReader
	line    int // number of the line last returned (1-based)
	bytes   int64
	tooLong bool // the line last returned was truncated
	max     int  // the longest line accepted
}

func newLineReader(r io.Reader, max int) *lineReader {
	return &lineReader{LineReader: *fileio.NewLineReader(r, max), max: max}
}

// next is LineReader.Next, mirroring its counters into the fields.
func (l *lineReader) next() ([]byte, error) {
	b, err := l.Next()
	l.line, l.bytes, l.tooLong = l.Line, l.Bytes, l.TooLong
	return b, err
}

// Corpus formats accepted by OpenCorpus (the names of the Formats table).
const (
	FormatJSONL = "jsonl"
	FormatCSV   = "csv"
	FormatText  = "text"
)

// CorpusFormat is one entry of the corpus format table (Formats): adding a
// format means adding one entry, which DetectFormat, OpenCorpus and the
// --format help and validation of `hopwise build` all read.
type CorpusFormat struct {
	// Name is the --format value, lower case.
	Name string
	// Extensions are the lower-case file extensions, with the dot, that
	// DetectFormat maps to the format (a trailing .gz is ignored).
	Extensions []string
	// Help describes the format for people, one or more lines without
	// the extensions (the build help appends them).
	Help string
	// NeedsLexicon: the reader finds entities with a Lexicon (WithLexicon
	// or OpenCorpus's lexicon path), which is then required.
	NeedsLexicon bool
	// GroupsInMemory: the reader holds data of its own within WithMemBudget
	// (CSV groups the rows of a context), so a caller sharing one budget
	// between the reader and the builder splits it.
	GroupsInMemory bool
	// Open returns a reader of the format over in, whose errors name the
	// file name; lex is nil unless NeedsLexicon. A reader that also
	// implements io.Closer holds resources (temporary files) and is closed
	// by OpenCorpus's closer.
	Open func(in io.Reader, name string, lex *Lexicon, opts ...ReadOption) ContextReader
}

// formats is the corpus format table, in the order of the help.
var formats = []CorpusFormat{
	{Name: FormatJSONL, Extensions: []string{".jsonl", ".ndjson", ".json"},
		Help: `one context per line: {"id":"c1","obs":{"vent3":"open","zone2":"dry"}}
or, presence only, {"id":"c2","ents":["pump1","bed4"]}`,
		Open: func(in io.Reader, name string, _ *Lexicon, opts ...ReadOption) ContextReader {
			return NewJSONLReader(in, name, opts...)
		}},
	{Name: FormatCSV, Extensions: []string{".csv"}, GroupsInMemory: true,
		Help: `a long table with the header context,entity,value (or context,entity);
rows of one context may be anywhere in the file`,
		Open: func(in io.Reader, name string, _ *Lexicon, opts ...ReadOption) ContextReader {
			return NewCSVReader(in, name, opts...)
		}},
	{Name: FormatText, Extensions: []string{".txt", ".text", ".md"}, NeedsLexicon: true,
		Help: `plain text, one context per blank-line-separated paragraph, entities
found by a lexicon TSV (--lexicon, "surface form<TAB>entity id", or
"surface form<TAB>entity id<TAB>value" for a form stating a value),
case-insensitively on word boundaries, leftmost-longest`,
		Open: func(in io.Reader, name string, lex *Lexicon, opts ...ReadOption) ContextReader {
			return NewTextReader(in, name, lex, opts...)
		}},
}

// Formats returns the corpus format table, in help order. The slice is a
// copy; the entries' Extensions must not be modified. O(formats).
func Formats() []CorpusFormat { return slices.Clone(formats) }

// LookupFormat returns the table entry named name (lower case), and false
// when there is none. O(formats).
func LookupFormat(name string) (CorpusFormat, bool) {
	for _, f := range formats {
		if f.Name == name {
			return f, true
		}
	}
	return CorpusFormat{}, false
}

// FormatNames lists the format names for messages: "jsonl, csv or text".
func FormatNames() string {
	names := make([]string, len(formats))
	for i, f := range formats {
		names[i] = f.Name
	}
	if len(names) < 2 {
		return strings.Join(names, "")
	}
	return strings.Join(names[:len(names)-1], ", ") + " or " + names[len(names)-1]
}

// DetectFormat guesses the corpus format from a file name by the
// extensions of the format table (Formats): .jsonl, .ndjson and .json are
// JSONL, .csv is CSV, .txt, .text and .md are text. A trailing .gz is
// ignored. It returns "" when the extension is unknown. O(extensions).
func DetectFormat(path string) string {
	p := strings.ToLower(path)
	p = strings.TrimSuffix(p, ".gz")
	ext := filepath.Ext(p)
	for _, f := range formats {
		if slices.Contains(f.Extensions, ext) {
			return f.Name
		}
	}
	return ""
}

// ErrUnknownFormat is returned by OpenCorpus when the format is neither given
// nor detectable from the file name, or is not one of the Format* names.
var ErrUnknownFormat = errors.New("graphidx: unknown corpus format")

// ErrLexiconRequired is returned by OpenCorpus for text corpora without a
// lexicon.
var ErrLexiconRequired = errors.New("graphidx: a text corpus needs a lexicon: pass --lexicon FILE.tsv (lines: surface form<TAB>entity id[<TAB>value])")

// OpenCorpus opens a corpus file and returns a reader for it and the closer
// that releases the file and any temporary files of the reader. format is
// the name of an entry of the format table (Formats: FormatJSONL, FormatCSV,
// FormatText), or "" to detect it from the extension (see DetectFormat).
// lexicon is the path of the lexicon TSV (see ParseLexicon) and is required
// for a format that NeedsLexicon (text) unless WithLexicon is given,
// ignored otherwise. Files ending in .gz are
// decompressed on the fly. The reader also implements StatsReader.
func OpenCorpus(path, format, lexicon string, opts ...ReadOption) (ContextReader, io.Closer, error) {
	if format == "" {
		format = DetectFormat(path)
	}
	if format == "" {
		return nil, nil, fmt.Errorf("%w: cannot tell the format of %s from its extension; pass it explicitly", ErrUnknownFormat, path)
	}
	cf, ok := LookupFormat(format)
	if !ok {
		return nil, nil, fmt.Errorf("%w: %q (want %s)", ErrUnknownFormat, format, FormatNames())
	}
	var lex *Lexicon
	if cf.NeedsLexicon {
		lex = newReadConfig(opts).lexicon
	}
	if cf.NeedsLexicon && lex == nil {
		if lexicon == "" {
			return nil, nil, fmt.Errorf("%w: %s", ErrLexiconRequired, path)
		}
		var err error
		if lex, err = LoadLexicon(lexicon); err != nil {
			return nil, nil, err
		}
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	cl := &multiCloser{f}
	var in io.Reader = f
	if strings.HasSuffix(strings.ToLower(path), ".gz") {
		gz, err := gzip.NewReader(bufio.NewReaderSize(f, 64<<10))
		if err != nil {
			f.Close()
			return nil, nil, fmt.Errorf("%s: %w", path, err)
		}
		cl = &multiCloser{gz, f}
		in = gz
	}
	r := cf.Open(in, path, lex, opts...)
	if c, ok := r.(io.Closer); ok {
		*cl = append(multiCloser{c}, *cl...)
	}
	return r, cl, nil
}

type multiCloser []io.Closer

func (m *multiCloser) Close() error {
	var errs []error
	for _, c := range *m {
		if err := c.Close(); err != nil {
			errs = append(errs, err)
		}
	}
	*m = nil
	return errors.Join(errs...)
}
