package graphidx

import (
	"errors"
	"fmt"
	"slices"
	"unicode/utf8"
	"unsafe"
)

// MaxLinkBytes is the longest text Link accepts. A prompt longer than this is
// an error (ErrTextTooLong), never a partial link.
const MaxLinkBytes = 1 << 20

var (
	// ErrTextTooLong is returned by Lexicon.Link for a text longer than
	// MaxLinkBytes.
	ErrTextTooLong = errors.New("graphidx: text too long to link")
	// ErrInvalidText is returned by Lexicon.Link for a text that is not valid
	// UTF-8; the error names the first bad byte offset.
	ErrInvalidText = errors.New("graphidx: text is not valid UTF-8")
	// ErrNilLexicon is returned by Lexicon.Link and AppendLinks called on a
	// nil *Lexicon.
	ErrNilLexicon = errors.New("graphidx: no lexicon")
)

// Mention is one lexicon match in a text.
type Mention struct {
	Entity string // entity id the surface form names
	// Value is the entity's value the surface form states ("" when
	// HasValue is false).
	Value    string
	HasValue bool
	// Start and End are the byte span of the mention in the linked text:
	// Surface == text[Start:End].
	Start, End int
	Surface    string
}

// Link returns the mentions of lexicon entities in text, in text order, by
// the same rules as Match: case-insensitive, on word boundaries, leftmost
// longest, never overlapping. Unlike Match it keeps every mention (an entity
// named twice gives two mentions) with its byte span and, for a form listed
// with a value, that value. A text longer than MaxLinkBytes is
// ErrTextTooLong and one that is not valid UTF-8 is ErrInvalidText naming
// the first bad byte offset; neither gives a partial result. It is safe for
// concurrent use.
//
// Cost O(T·L) table probes for a text of T tokens and L =
// Stats().MaxFormTokens, with bounded scratch memory; see AppendLinks to
// reuse the result slice.
func (l *Lexicon) Link(text string) ([]Mention, error) {
	return l.AppendLinks(nil, text)
}

// AppendLinks is Link appending the mentions to dst. The mentions' strings
// point into the lexicon and into text; with a dst of enough capacity it
// does not allocate.
func (l *Lexicon) AppendLinks(dst []Mention, text string) ([]Mention, error) {
	if l == nil {
		return dst, fmt.Errorf("%w: Link on a nil *Lexicon", ErrNilLexicon)
	}
	if len(text) > MaxLinkBytes {
		return dst, fmt.Errorf("%w: %d bytes, limit %d", ErrTextTooLong, len(text), MaxLinkBytes)
	}
	if !utf8.ValidString(text) {
		for i := 0; i < len(text); {
			r, n := utf8.DecodeRuneInString(text[i:])
			if r == utf8.RuneError && n == 1 {
				return dst, fmt.Errorf("%w: bad byte 0x%02x at offset %d", ErrInvalidText, text[i], i)
			}
			i += n
		}
	}
	if len(text) == 0 {
		return dst, nil
	}
	m := linkerPool.Get().(*linker)
	defer m.release()
	// The linker only reads the bytes; text is never written through them.
	m.run(l, unsafe.Slice(unsafe.StringData(text), len(text)), false)
	dst = slices.Grow(dst, len(m.found)) // one allocation at most
	for _, f := range m.found {
		mt := Mention{Entity: l.entityAt(f), Start: f.start, End: f.end, Surface: text[f.start:f.end]}
		if v := f.val; v != 0 {
			mt.Value, mt.HasValue = l.values.str(v-1), true
		}
		dst = append(dst, mt)
	}
	return dst, nil
}

// Found is one mention reported by a Matcher: its byte span in the text,
// and its entity and value by number rather than by name, so that a caller
// aggregating many mentions (the text corpus reader) compares integers.
// Entities are numbered 0, 1, … in the order the lexicon file first names
// them, and so are values; EntityName and ValueName return the names.
type Found struct {
	// Start and End are the mention's byte span: text[Start:End].
	Start, End int
	// Entity is the number of the entity the surface form names.
	Entity uint32
	// Value is the number of the value the form states when HasValue, and
	// 0 otherwise.
	Value    uint32
	HasValue bool
}

// Matcher finds the mentions of one lexicon in a sequence of texts, reusing
// its scratch memory from text to text: the entry point of the text corpus
// reader (graphidx/corpus), which links every paragraph of a corpus. The
// mentions are those of Link (same rules, text order). A Matcher is not
// safe for concurrent use; the Lexicon itself is, so use one Matcher per
// goroutine.
type Matcher struct {
	l     *Lexicon
	m     linker
	found []Found
}

// NewMatcher returns a Matcher over l, which must not be nil.
func (l *Lexicon) NewMatcher() *Matcher { return &Matcher{l: l} }

// Find returns the mentions of the lexicon in text, in text order. Unlike
// Link it takes a text of any length and does not check it: bytes that are
// not valid UTF-8 never match. The slice is reused by the next call. Cost as
// for Link, with no allocation once the Matcher's buffers have grown to the
// largest text.
func (m *Matcher) Find(text []byte) []Found {
	m.m.run(m.l, text, false)
	m.found = m.found[:0]
	for _, f := range m.m.found {
		fd := Found{Start: f.start, End: f.end, Entity: f.ent}
		if f.val != 0 {
			fd.Value, fd.HasValue = f.val-1, true
		}
		m.found = append(m.found, fd)
	}
	return m.found
}

// EntityName is the id of entity number n (see Found). It panics when n is
// not below Stats().Entities. O(1), no allocation.
func (l *Lexicon) EntityName(n uint32) string { return l.ents.str(n) }

// ValueName is the label of value number n (see Found). It panics when n is
// not below Stats().Values. O(1), no allocation.
func (l *Lexicon) ValueName(n uint32) string { return l.values.str(n) }

// Valued reports whether entity number n is a valued entity: at least one of
// its forms states a value (see ParseLexicon). O(1).
func (l *Lexicon) Valued(n uint32) bool { return l.valued[n] }
