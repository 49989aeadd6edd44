package graphidx

import (
	"errors"
	"fmt"
	"unicode/utf8"
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
// named twice gives two mentions) with its byte span. It is safe for
// concurrent use.
func (l *Lexicon) Link(text string) ([]Mention, error) {
	if len(text) > MaxLinkBytes {
		return nil, fmt.Errorf("%w: %d bytes, limit %d", ErrTextTooLong, len(text), MaxLinkBytes)
	}
	if !utf8.ValidString(text) {
		for i, r := range text {
			if r == utf8.RuneError {
				if _, n := utf8.DecodeRuneInString(text[i:]); n == 1 {
					return nil, fmt.Errorf("%w: bad byte at offset %d", ErrInvalidText, i)
				}
			}
		}
		return nil, ErrInvalidText
	}
	var m matcher
	m.match(l, []byte(text))
	out := make([]Mention, 0, len(m.kept))
	for _, f := range m.kept {
		out = append(out, Mention{Entity: l.ents[f.id], Start: f.start, End: f.end, Surface: text[f.start:f.end]})
	}
	return out, nil
}

// DisplayName is the first surface form listed for entity in the lexicon
// file, as written there (not case-folded), or "" when the lexicon does not
// name the entity.
func (l *Lexicon) DisplayName(entity string) string {
	return l.display[entity]
}
