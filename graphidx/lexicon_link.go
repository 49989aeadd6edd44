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
		return dst, fmt.Errorf("%w: Link on a nil *Lexicon", ErrLexiconRequired)
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
