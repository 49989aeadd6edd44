package corpus

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
)

// Corpus formats accepted by Open (the names of the format table, Formats).
const (
	FormatJSONL = "jsonl"
	FormatCSV   = "csv"
	FormatText  = "text"
)

// Format is one entry of the corpus format table (Formats): adding a format
// means adding one entry, which DetectFormat, Open and the --format help and
// validation of `hopwise build` all read.
type Format struct {
	// Name is the --format value, lower case.
	Name string
	// Extensions are the lower-case file extensions, with the dot, that
	// DetectFormat maps to the format (a trailing .gz is ignored).
	Extensions []string
	// Help describes the format for people, one or more lines without
	// the extensions (the build help appends them).
	Help string
	// NeedsLexicon: the reader finds entities with a Lexicon (WithLexicon
	// or Open's lexicon path), which is then required.
	NeedsLexicon bool
	// GroupsInMemory: the reader holds data of its own within graphidx.WithMemBudget
	// (CSV groups the rows of a context), so a caller sharing one budget
	// between the reader and the builder splits it.
	GroupsInMemory bool
	// Open returns a reader of the format over in, whose errors name the
	// file name; lex is nil unless NeedsLexicon. A reader that also
	// implements io.Closer holds resources (temporary files) and is closed
	// by Open's closer.
	Open func(in io.Reader, name string, lex *graphidx.Lexicon, opts ...ReadOption) graphidx.ContextReader
}

// formats is the corpus format table, in the order of the help.
var formats = []Format{
	{Name: FormatJSONL, Extensions: []string{".jsonl", ".ndjson", ".json"},
		Help: `one context per line: {"id":"c1","obs":{"vent3":"open","zone2":"dry"}}
or, presence only, {"id":"c2","ents":["pump1","bed4"]}`,
		Open: func(in io.Reader, name string, _ *graphidx.Lexicon, opts ...ReadOption) graphidx.ContextReader {
			return NewJSONLReader(in, name, opts...)
		}},
	{Name: FormatCSV, Extensions: []string{".csv"}, GroupsInMemory: true,
		Help: `a long table with the header context,entity,value (or context,entity);
rows of one context may be anywhere in the file`,
		Open: func(in io.Reader, name string, _ *graphidx.Lexicon, opts ...ReadOption) graphidx.ContextReader {
			return NewCSVReader(in, name, opts...)
		}},
	{Name: FormatText, Extensions: []string{".txt", ".text", ".md"}, NeedsLexicon: true,
		Help: `plain text, one context per blank-line-separated paragraph, entities
found by a lexicon TSV (--lexicon, "surface form<TAB>entity id", or
"surface form<TAB>entity id<TAB>value" for a form stating a value),
case-insensitively on word boundaries, leftmost-longest`,
		Open: func(in io.Reader, name string, lex *graphidx.Lexicon, opts ...ReadOption) graphidx.ContextReader {
			return NewTextReader(in, name, lex, opts...)
		}},
}

// Formats returns the corpus format table, in help order. The slice is a
// copy; the entries' Extensions must not be modified. O(formats).
func Formats() []Format { return slices.Clone(formats) }

// LookupFormat returns the table entry named name, compared without regard
// to case ("JSONL" is jsonl), and false when there is none. O(formats).
func LookupFormat(name string) (Format, bool) {
	for _, f := range formats {
		if strings.EqualFold(f.Name, name) {
			return f, true
		}
	}
	return Format{}, false
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

// extensionNames lists every extension of the table for messages:
// ".jsonl, .ndjson, .json, .csv, .txt, .text, .md".
func extensionNames() string {
	var exts []string
	for _, f := range formats {
		exts = append(exts, f.Extensions...)
	}
	return strings.Join(exts, ", ")
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

// Open opens a corpus file and returns a reader for it and the closer that
// releases the file and any temporary files of the reader. format is
// the name of an entry of the format table (Formats: FormatJSONL, FormatCSV,
// FormatText), or "" to detect it from the extension (see DetectFormat).
// lexicon is the path of the lexicon TSV (see graphidx.ParseLexicon) and is required
// for a format that NeedsLexicon (text) unless WithLexicon is given,
// ignored otherwise. Files ending in .gz are decompressed on the fly. The
// reader also implements graphidx.StatsReader.
func Open(path, format, lexicon string, opts ...ReadOption) (graphidx.ContextReader, io.Closer, error) {
	if format == "" {
		format = DetectFormat(path)
	}
	if format == "" {
		return nil, nil, fmt.Errorf("%w: cannot tell the format of %s from its extension (known: %s, each also with .gz); give the format (hopwise build --format): %s",
			ErrUnknownFormat, path, extensionNames(), FormatNames())
	}
	cf, ok := LookupFormat(format)
	if !ok {
		return nil, nil, fmt.Errorf("%w: %q (want %s)", ErrUnknownFormat, format, FormatNames())
	}
	var lex *graphidx.Lexicon
	if cf.NeedsLexicon {
		lex = newConfig(opts).lexicon
	}
	if cf.NeedsLexicon && lex == nil {
		if lexicon == "" {
			return nil, nil, fmt.Errorf("%w: %s", ErrLexiconRequired, path)
		}
		var err error
		if lex, err = graphidx.LoadLexicon(lexicon); err != nil {
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

// trimBOM drops a UTF-8 byte-order mark from the start of a file's first
// line (as the lexicon reader does): editors and spreadsheet exports on
// some systems write one, and it is no part of the first name (RFC 8259
// §8.1 lets a JSON parser ignore it). O(1).
func trimBOM(line []byte) []byte { return bytes.TrimPrefix(line, []byte("\xef\xbb\xbf")) }
