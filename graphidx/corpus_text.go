package graphidx

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"slices"
	"strconv"
	"unicode"
	"unicode/utf8"

	"github.com/coregx/ahocorasick"
)

// ReasonDuplicateSurface: a lexicon maps one surface form (after case
// folding) to two different entities. Lexicon errors are always fatal.
const ReasonDuplicateSurface = "duplicate-surface"

// Lexicon maps surface forms to entity ids for the text reader. It is
// immutable after parsing and safe for concurrent use.
type Lexicon struct {
	ac    *ahocorasick.Automaton
	ents  []string // pattern id → entity
	forms []string // pattern id → case-folded surface form
	// edge[i] bit 0: the form starts with a word rune; bit 1: it ends with one.
	edge []uint8
	// display maps an entity to its first surface form as written.
	display map[string]string
}

// Len is the number of distinct surface forms.
func (l *Lexicon) Len() int { return len(l.forms) }

// LoadLexicon reads a lexicon TSV file; see ParseLexicon.
func LoadLexicon(path string) (*Lexicon, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ParseLexicon(f, path)
}

// ParseLexicon reads a lexicon: one "surface form<TAB>entity id" per line.
// Blank lines and lines starting with '#' are ignored. Both fields are
// trimmed of surrounding spaces and must be non-empty valid UTF-8 of at most
// MaxNameBytes. Surface forms are case-folded (unicode.ToLower per rune);
// several forms may name one entity, but one folded form naming two entities
// is an error (duplicate-surface). Every error is a *LineError naming the
// lexicon file and line. Building the automaton costs O(Σ|form|).
func ParseLexicon(r io.Reader, name string) (*Lexicon, error) {
	lr := newLineReader(r, 1<<20)
	lex := &Lexicon{display: map[string]string{}}
	seen := map[string]int{} // folded form → pattern id
	lines := []int{}
	for {
		line, err := lr.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("%s: %w", name, err)
		}
		le := func(field, reason, detail string) error {
			return &LineError{File: name, Line: lr.line, Field: field, Reason: reason, Detail: detail}
		}
		if lr.tooLong {
			return nil, le("", ReasonLineTooLong, "")
		}
		t := bytes.TrimSpace(line)
		if len(t) == 0 || t[0] == '#' {
			continue
		}
		parts := bytes.Split(line, []byte{'\t'})
		if len(parts) < 2 {
			return nil, le("", ReasonTooFewColumns, "want surface form<TAB>entity id")
		}
		if len(parts) > 2 {
			return nil, le("", ReasonTooManyColumns, "want surface form<TAB>entity id")
		}
		form, ent := bytes.TrimSpace(parts[0]), bytes.TrimSpace(parts[1])
		if why := checkName(form); why != "" {
			return nil, le("surface", why, "")
		}
		if why := checkName(ent); why != "" {
			return nil, le("entity", why, "")
		}
		folded := string(foldCase(nil, form))
		if id, ok := seen[folded]; ok {
			if lex.ents[id] != string(ent) {
				return nil, le("surface", ReasonDuplicateSurface, fmt.Sprintf("%s names %s here and %s at line %d",
					strconv.Quote(string(form)), strconv.Quote(string(ent)), strconv.Quote(lex.ents[id]), lines[id]))
			}
			continue
		}
		if _, ok := lex.display[string(ent)]; !ok {
			lex.display[string(ent)] = string(form)
		}
		seen[folded] = len(lex.forms)
		lines = append(lines, lr.line)
		lex.forms = append(lex.forms, folded)
		lex.ents = append(lex.ents, string(ent))
		var e uint8
		if r, _ := utf8.DecodeRuneInString(folded); isWordRune(r) {
			e |= 1
		}
		if r, _ := utf8.DecodeLastRuneInString(folded); isWordRune(r) {
			e |= 2
		}
		lex.edge = append(lex.edge, e)
	}
	if len(lex.forms) == 0 {
		return nil, &LineError{File: name, Line: lr.line, Reason: ReasonEmptyContext, Detail: "lexicon has no entries"}
	}
	ac, err := ahocorasick.NewBuilder().AddStrings(lex.forms).SetMatchKind(ahocorasick.LeftmostLongest).Build()
	if err != nil {
		return nil, fmt.Errorf("%s: building the matcher: %w", name, err)
	}
	lex.ac = ac
	return lex, nil
}

func isWordRune(r rune) bool {
	return r == '_' || unicode.IsLetter(r) || unicode.IsDigit(r)
}

// foldCase appends the lower-case form of s to dst: ASCII bytes directly,
// other runes through unicode.ToLower. Invalid UTF-8 bytes are kept as is.
func foldCase(dst, s []byte) []byte {
	for i := 0; i < len(s); {
		c := s[i]
		if c < utf8.RuneSelf {
			if 'A' <= c && c <= 'Z' {
				c += 'a' - 'A'
			}
			dst = append(dst, c)
			i++
			continue
		}
		r, n := utf8.DecodeRune(s[i:])
		if r == utf8.RuneError && n == 1 {
			dst = append(dst, c)
		} else {
			dst = utf8.AppendRune(dst, unicode.ToLower(r))
		}
		i += n
	}
	return dst
}

// textMatch is one accepted lexicon match.
type textMatch struct{ start, end, id int }

// Match returns the entity ids mentioned in text, deduplicated and sorted.
// Matching is case-insensitive (both sides case-folded) and respects word
// boundaries: a form whose first rune is a letter, digit or '_' must not be
// preceded by one, and likewise at its end. Among the boundary-respecting
// matches the leftmost-longest non-overlapping ones are kept, so with forms
// "zone 2" and "zone 2 vent" the text "zone 2 vent" names only the second.
// Cost O(|text| + matches·log matches).
func (l *Lexicon) Match(text []byte) []string {
	var m matcher
	return slices.Clone(m.match(l, text))
}

type matcher struct {
	folded []byte
	found  []textMatch
	kept   []textMatch // the accepted matches in text order
	ents   []string
}

func (m *matcher) match(l *Lexicon, text []byte) []string {
	m.folded = foldCase(m.folded[:0], text)
	m.found = m.found[:0]
	m.ents = m.ents[:0]
	m.kept = m.kept[:0]
	t := m.folded
	for _, mt := range l.ac.FindAllOverlapping(t) {
		e := l.edge[mt.PatternID]
		if e&1 != 0 && mt.Start > 0 {
			if r, _ := utf8.DecodeLastRune(t[:mt.Start]); isWordRune(r) {
				continue
			}
		}
		if e&2 != 0 && mt.End < len(t) {
			if r, _ := utf8.DecodeRune(t[mt.End:]); isWordRune(r) {
				continue
			}
		}
		m.found = append(m.found, textMatch{mt.Start, mt.End, mt.PatternID})
	}
	slices.SortFunc(m.found, func(a, b textMatch) int {
		if a.start != b.start {
			return a.start - b.start
		}
		return b.end - a.end
	})
	end := 0
	for _, f := range m.found {
		if f.start < end {
			continue
		}
		end = f.end
		m.kept = append(m.kept, f)
		m.ents = append(m.ents, l.ents[f.id])
	}
	slices.Sort(m.ents)
	return slices.Compact(m.ents)
}

// TextReader reads plain text, one context per paragraph (paragraphs are
// separated by blank lines), and observes every lexicon entity mentioned in
// the paragraph with PresentValue (see Lexicon.Match for the matching
// rules). A paragraph's context id is "<name>#p<N>", N counting paragraphs
// from 1. Paragraphs without a match are counted in ReadStats.Empty and
// skipped; they are not errors. A paragraph longer than the line limit is a
// line-too-long error at its first line. A TextReader is not safe for
// concurrent use.
type TextReader struct {
	lr    *lineReader
	name  string
	lex   *Lexicon
	bl    badLines
	para  []byte
	n     int
	m     matcher
	obs   []Observation
	atEOF bool
}

// NewTextReader returns a reader of paragraphs from r matched against lex.
// name is the file name used in ids and errors.
func NewTextReader(r io.Reader, name string, lex *Lexicon, opts ...ReadOption) *TextReader {
	cfg := newReadConfig(opts)
	tr := &TextReader{lr: newLineReader(r, cfg.maxLine), name: name, lex: lex}
	tr.bl.init(cfg.policy)
	return tr
}

// Stats returns the paragraph accounting so far.
func (r *TextReader) Stats() ReadStats { return r.bl.snapshot() }

// Skipped returns the counts of skipped paragraphs by reason.
func (r *TextReader) Skipped() map[string]int { return r.bl.Skipped() }

// BytesRead is the number of input bytes consumed so far.
func (r *TextReader) BytesRead() int64 { return r.lr.bytes }

// Next returns the context of the next paragraph with at least one match.
func (r *TextReader) Next() (Context, error) {
	if r.lex == nil {
		return Context{}, fmt.Errorf("%s: %w", r.name, ErrLexiconRequired)
	}
	for !r.atEOF {
		// Collect one paragraph.
		r.para = r.para[:0]
		first, tooLong := 0, false
		for {
			line, err := r.lr.next()
			if err == io.EOF {
				r.atEOF = true
				break
			}
			if err != nil {
				return Context{}, fmt.Errorf("%s:%d: %w", r.name, r.lr.line+1, err)
			}
			r.bl.stats.Lines++
			if !r.lr.tooLong && isBlank(line) {
				if first == 0 {
					continue // leading blank lines
				}
				break
			}
			if first == 0 {
				first = r.lr.line
			}
			if tooLong || r.lr.tooLong || len(r.para)+1+len(line) > r.lr.max {
				tooLong = true
				r.para = r.para[:0]
				continue
			}
			if len(r.para) > 0 {
				r.para = append(r.para, '\n')
			}
			r.para = append(r.para, line...)
		}
		if first == 0 {
			continue
		}
		r.n++
		r.bl.stats.Records++
		if tooLong {
			if e := r.bl.bad(&LineError{File: r.name, Line: first, Reason: ReasonLineTooLong,
				Detail: fmt.Sprintf("paragraph %d longer than %d bytes", r.n, r.lr.max)}); e != nil {
				return Context{}, e
			}
			continue
		}
		ents := r.m.match(r.lex, r.para)
		if len(ents) == 0 {
			r.bl.stats.Empty++
			continue
		}
		r.obs = r.obs[:0]
		for _, e := range ents {
			r.obs = append(r.obs, Observation{Entity: e, Value: PresentValue})
		}
		r.bl.stats.OK++
		r.bl.stats.Contexts++
		return Context{ID: r.name + "#p" + strconv.Itoa(r.n), Obs: r.obs}, nil
	}
	return Context{}, io.EOF
}
