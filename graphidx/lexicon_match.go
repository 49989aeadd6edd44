package graphidx

import (
	"bytes"
	"math/bits"
	"slices"
	"sync"
	"unicode"
	"unicode/utf8"
)

// wordASCII[c] is true for the ASCII word bytes: letters, digits and '_'.
var wordASCII = func() (t [utf8.RuneSelf]bool) {
	for c := range utf8.RuneSelf {
		t[c] = c == '_' || 'a' <= c && c <= 'z' || 'A' <= c && c <= 'Z' || '0' <= c && c <= '9'
	}
	return t
}()

// isWordRune reports whether r is a word rune: a letter, a digit or '_'.
func isWordRune(r rune) bool {
	if r < utf8.RuneSelf {
		return wordASCII[r]
	}
	return unicode.IsLetter(r) || unicode.IsDigit(r)
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

// foldEqual reports whether foldCase(s) == folded, without building it.
func foldEqual(folded, s []byte) bool {
	j := 0
	for i := 0; i < len(s); {
		c := s[i]
		if c < utf8.RuneSelf {
			if 'A' <= c && c <= 'Z' {
				c += 'a' - 'A'
			}
			if j >= len(folded) || folded[j] != c {
				return false
			}
			i++
			j++
			continue
		}
		r, n := utf8.DecodeRune(s[i:])
		if r == utf8.RuneError && n == 1 {
			if j >= len(folded) || folded[j] != c {
				return false
			}
			i++
			j++
			continue
		}
		var b [utf8.UTFMax]byte
		k := utf8.EncodeRune(b[:], unicode.ToLower(r))
		if j+k > len(folded) || !bytes.Equal(folded[j:j+k], b[:k]) {
			return false
		}
		i += n
		j += k
	}
	return j == len(folded)
}

// hashAcc hashes the folded bytes of one token, eight bytes at a time.
type hashAcc struct {
	h, w uint64
	n    uint64
}

func (a *hashAcc) add(c byte) {
	a.w = a.w<<8 | uint64(c)
	a.n++
	if a.n&7 == 0 {
		a.h = bits.RotateLeft64((a.h^a.w)*0x9E3779B97F4A7C15, 29)
		a.w = 0
	}
}

func (a *hashAcc) addRune(r rune) {
	var b [utf8.UTFMax]byte
	n := utf8.EncodeRune(b[:], r)
	for _, c := range b[:n] {
		a.add(c)
	}
}

func (a *hashAcc) sum() uint64 { return a.h ^ a.w*0xC2B2AE3D27D4EB4F ^ a.n<<56 }

// chainKey extends the key of a token prefix by one token hash. mix is the
// SplitMix64 finalizer (Steele, Lea and Flood, "Fast splittable pseudorandom
// number generators", OOPSLA 2014), a bijection, so the key depends on the
// order of the tokens. A key is never 0 (0 marks an empty table slot).
func chainKey(key, h uint64) uint64 {
	x := key ^ h
	x ^= x >> 30
	x *= 0xBF58476D1CE4E5B9
	x ^= x >> 27
	x *= 0x94D049BB133111EB
	x ^= x >> 31
	if x == 0 {
		x = 1
	}
	return x
}

// tokenizer cuts a text into tokens: a maximal run of word runes (after
// case folding), or one other rune, or one invalid UTF-8 byte. In perRune
// mode every rune is a token. Tokens cover the text without gaps.
type tokenizer struct {
	text    []byte
	pos     int
	seed    uint64
	perRune bool
}

func (t *tokenizer) reset(text []byte, seed uint64, perRune bool) {
	*t = tokenizer{text: text, seed: seed, perRune: perRune}
}

// next consumes the token at t.pos (which must be < len(t.text)) and
// returns its end, the hash of its folded bytes and whether it is a word
// token. O(token length).
func (t *tokenizer) next() (int, uint64, bool) {
	s, i := t.text, t.pos
	a := hashAcc{h: t.seed}
	// The first rune decides the kind of token.
	c := s[i]
	if c < utf8.RuneSelf {
		if 'A' <= c && c <= 'Z' {
			c += 'a' - 'A'
		}
		a.add(c)
		i++
		if !wordASCII[c] || t.perRune {
			t.pos = i
			return i, a.sum(), wordASCII[c]
		}
	} else {
		r, n := utf8.DecodeRune(s[i:])
		if r == utf8.RuneError && n == 1 {
			a.add(c)
			t.pos = i + 1
			return i + 1, a.sum(), false
		}
		r = unicode.ToLower(r)
		a.addRune(r)
		i += n
		if w := isWordRune(r); !w || t.perRune {
			t.pos = i
			return i, a.sum(), w
		}
	}
	// A word run: take word runes to its end.
	for i < len(s) {
		c := s[i]
		if c < utf8.RuneSelf {
			if !wordASCII[c] {
				break
			}
			if 'A' <= c && c <= 'Z' {
				c += 'a' - 'A'
			}
			a.add(c)
			i++
			continue
		}
		r, n := utf8.DecodeRune(s[i:])
		if r == utf8.RuneError && n == 1 {
			break
		}
		if r = unicode.ToLower(r); !isWordRune(r) {
			break
		}
		a.addRune(r)
		i += n
	}
	t.pos = i
	return i, a.sum(), true
}

// textMatch is one accepted lexicon match: the byte span in the text and
// the pattern (form) id.
type textMatch struct {
	start, end int
	pat        uint32
}

// linkWindow is the most text tokens kept behind the current start before
// the token window slides; with the longest form's tokens ahead of it, it
// bounds the linker's memory independently of the text length.
const linkWindow = 4096

// linker is the scratch state of one match run. It is reused across texts
// (pooled for Link, owned by a TextReader) and is not safe for concurrent
// use.
type linker struct {
	tz    tokenizer
	start int      // byte offset where window token 0 starts
	ends  []int    // token j ends at ends[j]
	hs    []uint64 // token hashes
	words []bool   // word token?
	found []textMatch
	ents  []string
}

var linkerPool = sync.Pool{New: func() any { return new(linker) }}

func (m *linker) fill(k int) bool {
	for len(m.hs) < k {
		if m.tz.pos >= len(m.tz.text) {
			return false
		}
		end, h, w := m.tz.next()
		m.ends = append(m.ends, end)
		m.hs = append(m.hs, h)
		m.words = append(m.words, w)
	}
	return true
}

func (m *linker) tokStart(j int) int {
	if j == 0 {
		return m.start
	}
	return m.ends[j-1]
}

// run puts the matches of l in text into m.found, in text order.
//
// Leftmost-longest without overlaps: from the first token, walk the implicit
// trie of token prefixes (one table probe per token) while the text's
// tokens are a prefix of some form, remember the last position where they
// spell a whole form (verified byte by byte, so a hash collision can never
// give a false match), emit that longest match and resume after it, or
// resume at the next token when there was none. A form is a sequence of
// whole tokens, so its word edges can only fall on word boundaries of the
// text. Cost O(T·L) table probes for T text tokens and L =
// Stats().MaxFormTokens, plus the bytes of the candidate spans compared;
// memory O(linkWindow + L) tokens, never the set of overlapping matches.
//
// With all set (the check mode of the all-matches automaton output) every
// verified match at every start is reported and the walk never skips ahead.
func (m *linker) run(l *Lexicon, text []byte, all bool) {
	m.tz.reset(text, l.seed, l.perRune)
	m.start = 0
	m.ends, m.hs, m.words, m.found = m.ends[:0], m.hs[:0], m.words[:0], m.found[:0]
	skipSep := !l.firstSep && !l.perRune
	for i := 0; m.fill(i + 1); {
		if i >= linkWindow {
			m.start = m.ends[i-1]
			m.ends = m.ends[:copy(m.ends, m.ends[i:])]
			m.hs = m.hs[:copy(m.hs, m.hs[i:])]
			m.words = m.words[:copy(m.words, m.words[i:])]
			i = 0
		}
		if skipSep && !m.words[i] {
			i++ // no form starts with a separator
			continue
		}
		bestJ, best := -1, uint32(0)
		key := l.seed
		for j := i; m.fill(j + 1); j++ {
			key = chainKey(key, m.hs[j])
			v, ok := l.lookup(key)
			if ok && v&(patMask|overBit) != 0 {
				if p, ok := l.verify(key, v, text[m.tokStart(i):m.ends[j]]); ok {
					if all {
						m.found = append(m.found, textMatch{m.tokStart(i), m.ends[j], p})
					}
					bestJ, best = j, p
				}
			}
			if ok && v&childBit != 0 {
				continue
			}
			// A separator followed by a word token has no entry of its own
			// in the table (see Lexicon.add): step over it to the word.
			if !l.perRune && !m.words[j] && m.fill(j+2) && m.words[j+1] {
				continue
			}
			break
		}
		if bestJ >= 0 && !all {
			m.found = append(m.found, textMatch{m.tokStart(i), m.ends[bestJ], best})
			i = bestJ + 1
		} else {
			i++
		}
	}
}

// verify returns the pattern under key whose folded form equals the folded
// span.
func (l *Lexicon) verify(key uint64, v uint32, span []byte) (uint32, bool) {
	if p := v & patMask; p != 0 && foldEqual(l.form(p-1), span) {
		return p - 1, true
	}
	if v&overBit != 0 {
		for _, p := range l.over[key] {
			if foldEqual(l.form(p), span) {
				return p, true
			}
		}
	}
	return 0, false
}

// Match returns the entity ids mentioned in text, deduplicated and sorted.
// Matching is case-insensitive (both sides case-folded) and respects word
// boundaries: a form whose first rune is a letter, digit or '_' must not be
// preceded by one, and likewise at its end. Among the boundary-respecting
// matches the leftmost-longest non-overlapping ones are kept, so with forms
// "zone 2" and "zone 2 vent" the text "zone 2 vent" names only the second.
// Invalid UTF-8 bytes never match. Cost as for Link.
func (l *Lexicon) Match(text []byte) []string {
	m := linkerPool.Get().(*linker)
	defer m.release()
	m.run(l, text, false)
	m.ents = m.ents[:0]
	for _, f := range m.found {
		m.ents = append(m.ents, l.ents.str(l.pent[f.pat]))
	}
	slices.Sort(m.ents)
	return slices.Clone(slices.Compact(m.ents))
}

// release returns m to the pool, dropping buffers a huge text grew.
func (m *linker) release() {
	if cap(m.found) > 1<<14 {
		m.found = nil
	}
	if cap(m.ents) > 1<<14 {
		m.ents = nil
	}
	m.tz.text = nil
	linkerPool.Put(m)
}
