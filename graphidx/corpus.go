package graphidx

import (
	"bufio"
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
	// ReasonBadUTF8: a name, value or id is not valid UTF-8.
	ReasonBadUTF8 = "bad-utf8"
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

// Error formats the error as "file:line: field: reason[: detail]".
func (e *LineError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s:%d: ", e.File, e.Line)
	if e.Field != "" {
		b.WriteString(e.Field)
		b.WriteString(": ")
	}
	b.WriteString(e.Reason)
	if e.Detail != "" {
		b.WriteString(": ")
		b.WriteString(e.Detail)
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
}

func newReadConfig(opts []ReadOption) readConfig {
	c := readConfig{policy: Lenient, maxLine: DefaultMaxLineBytes, memLimit: DefaultMemBudget}
	for _, o := range opts {
		if o != nil {
			o.applyRead(&c)
		}
	}
	return c
}

type policyOption BadLinePolicy

func (o policyOption) applyRead(c *readConfig) { c.policy = BadLinePolicy(o) }

// WithPolicy sets the bad-line policy of a reader (Lenient by default).
func WithPolicy(p BadLinePolicy) ReadOption { return policyOption(p) }

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
func checkName(s []byte) string {
	switch {
	case len(s) == 0:
		return ReasonEmptyName
	case len(s) > MaxNameBytes:
		return ReasonNameTooLong
	case !utf8.Valid(s):
		return ReasonBadUTF8
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

// lineReader reads lines of bounded length and counts lines and bytes.
type lineReader struct {
	br      *bufio.Reader
	buf     []byte
	max     int
	line    int // number of the line last returned (1-based)
	bytes   int64
	tooLong bool // the line last returned was truncated
}

func newLineReader(r io.Reader, max int) *lineReader {
	return &lineReader{br: bufio.NewReaderSize(r, 64<<10), max: max}
}

// next returns the next line without its line terminator ("\n" or "\r\n").
// A line longer than max is consumed to its end and returned empty with
// tooLong set. It returns io.EOF when the input is exhausted.
func (l *lineReader) next() ([]byte, error) {
	l.buf = l.buf[:0]
	l.tooLong = false
	started := false
	for {
		chunk, err := l.br.ReadSlice('\n')
		l.bytes += int64(len(chunk))
		if len(chunk) > 0 {
			started = true
		}
		if !l.tooLong {
			if len(l.buf)+len(chunk) > l.max+2 { // +2 for the terminator
				l.tooLong = true
				l.buf = l.buf[:0]
			} else {
				l.buf = append(l.buf, chunk...)
			}
		}
		switch {
		case err == nil:
			l.line++
			return l.trim(), nil
		case errors.Is(err, bufio.ErrBufferFull):
			continue
		case errors.Is(err, io.EOF):
			if !started {
				return nil, io.EOF
			}
			l.line++
			return l.trim(), nil
		default:
			return nil, err
		}
	}
}

func (l *lineReader) trim() []byte {
	b := l.buf
	if len(b) > 0 && b[len(b)-1] == '\n' {
		b = b[:len(b)-1]
	}
	if len(b) > 0 && b[len(b)-1] == '\r' {
		b = b[:len(b)-1]
	}
	if !l.tooLong && len(b) > l.max {
		l.tooLong = true
		b = b[:0]
	}
	return b
}

// Corpus formats accepted by OpenCorpus.
const (
	FormatJSONL = "jsonl"
	FormatCSV   = "csv"
	FormatText  = "text"
)

// DetectFormat guesses the corpus format from a file name: .jsonl, .ndjson
// and .json are JSONL, .csv is CSV, .txt, .text and .md are text. A trailing
// .gz is ignored. It returns "" when the extension is unknown.
func DetectFormat(path string) string {
	p := strings.ToLower(path)
	p = strings.TrimSuffix(p, ".gz")
	switch filepath.Ext(p) {
	case ".jsonl", ".ndjson", ".json":
		return FormatJSONL
	case ".csv":
		return FormatCSV
	case ".txt", ".text", ".md":
		return FormatText
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
// one of FormatJSONL, FormatCSV, FormatText, or "" to detect it from the
// extension (see DetectFormat). lexicon is the path of the lexicon TSV
// (see ParseLexicon) and is required for text unless WithLexicon is given,
// ignored otherwise. Files ending in .gz are
// decompressed on the fly. The reader also implements StatsReader.
func OpenCorpus(path, format, lexicon string, opts ...ReadOption) (ContextReader, io.Closer, error) {
	if format == "" {
		format = DetectFormat(path)
	}
	switch format {
	case FormatJSONL, FormatCSV, FormatText:
	case "":
		return nil, nil, fmt.Errorf("%w: cannot tell the format of %s from its extension; pass it explicitly", ErrUnknownFormat, path)
	default:
		return nil, nil, fmt.Errorf("%w: %q (want jsonl, csv or text)", ErrUnknownFormat, format)
	}
	var lex *Lexicon
	if format == FormatText {
		lex = newReadConfig(opts).lexicon
	}
	if format == FormatText && lex == nil {
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
	name := path
	switch format {
	case FormatJSONL:
		return NewJSONLReader(in, name, opts...), cl, nil
	case FormatCSV:
		r := NewCSVReader(in, name, opts...)
		*cl = append(multiCloser{r}, *cl...)
		return r, cl, nil
	default:
		return NewTextReader(in, name, lex, opts...), cl, nil
	}
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
