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

// Token hashing: the folded bytes of a token, eight at a time (h, the
// running hash; w, the pending bytes; n, the byte count). Collisions only
// cost work: a match is always verified byte by byte.
func hashStep(h, w uint64) uint64 { return bits.RotateLeft64((h^w)*0x9E3779B97F4A7C15, 29) }

func addByte(h, w, n uint64, c byte) (uint64, uint64, uint64) {
	w = w<<8 | uint64(c)
	n++
	if n&7 == 0 {
		h, w = hashStep(h, w), 0
	}
	return h, w, n
}

func addRune(h, w, n uint64, r rune) (uint64, uint64, uint64) {
	var b [utf8.UTFMax]byte
	k := utf8.EncodeRune(b[:], r)
	for _, c := range b[:k] {
		h, w, n = addByte(h, w, n, c)
	}
	return h, w, n
}

func tokSum(h, w, n uint64) uint64 { return h ^ w*0xC2B2AE3D27D4EB4F ^ n<<56 }

// wordLower[c] is the lower-case form of ASCII word byte c, 0 for the other
// ASCII bytes.
var wordLower = func() (t [utf8.RuneSelf]byte) {
	for c := range byte(utf8.RuneSelf) {
		if wordASCII[c] {
			t[c] = c
			if 'A' <= c && c <= 'Z' {
				t[c] = c + 'a' - 'A'
			}
		}
	}
	return t
}()

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
	// lastN and lastC0 are the folded byte length and the first folded
	// byte of the token next returned last (the first-token shape).
	lastN  uint32
	lastC0 byte
}

func (t *tokenizer) reset(text []byte, seed uint64, perRune bool) {
	*t = tokenizer{text: text, seed: seed, perRune: perRune}
}

// scanClass[c] is wordLower[c] for an ASCII byte c and nonASCII for the
// others: one table load per byte in the tokenizer's ASCII loop.
var scanClass = func() (t [256]byte) {
	for c := range 256 {
		t[c] = nonASCII
		if c < utf8.RuneSelf {
			t[c] = wordLower[c]
		}
	}
	return t
}()

const nonASCII = 0xFF

// scanFold[c] is the folded form of ASCII byte c (c itself but for the
// upper-case letters).
var scanFold = func() (t [utf8.RuneSelf]byte) {
	for c := range byte(utf8.RuneSelf) {
		t[c] = c
		if 'A' <= c && c <= 'Z' {
			t[c] = c + 'a' - 'A'
		}
	}
	return t
}()

// next consumes the token at t.pos (which must be < len(t.text)) and
// returns its end, the hash of its folded bytes and whether it is a word
// token. O(token length), one table load per ASCII byte.
func (t *tokenizer) next() (int, uint64, bool) {
	s, i := t.text, t.pos
	h, w, n := t.seed, uint64(0), uint64(0)
	// The first rune decides the kind of token.
	if c := s[i]; c < utf8.RuneSelf {
		lc := wordLower[c]
		i++
		if lc == 0 || t.perRune {
			if 'A' <= c && c <= 'Z' {
				c += 'a' - 'A'
			}
			t.pos, t.lastN, t.lastC0 = i, 1, c
			return i, tokSum(h, uint64(c), 1), lc != 0
		}
		w, n = uint64(lc), 1
		t.lastC0 = lc
	} else {
		r, sz := utf8.DecodeRune(s[i:])
		if r == utf8.RuneError && sz == 1 {
			t.pos, t.lastN, t.lastC0 = i+1, 1, c
			return i + 1, tokSum(h, uint64(c), 1), false
		}
		r = unicode.ToLower(r)
		h, w, n = addRune(h, w, n, r)
		t.lastC0 = byte(w >> (8 * (n - 1))) // the first of the rune's n ≤ 4 bytes
		i += sz
		if word := isWordRune(r); !word || t.perRune {
			t.pos, t.lastN = i, uint32(n)
			return i, tokSum(h, w, n), word
		}
	}
	// A word run: take word runes to its end.
	for i < len(s) {
		c := s[i]
		if c < utf8.RuneSelf {
			lc := wordLower[c]
			if lc == 0 {
				break
			}
			w = w<<8 | uint64(lc)
			n++
			if n&7 == 0 {
				h, w = hashStep(h, w), 0
			}
			i++
			continue
		}
		r, sz := utf8.DecodeRune(s[i:])
		if r == utf8.RuneError && sz == 1 {
			break
		}
		if r = unicode.ToLower(r); !isWordRune(r) {
			break
		}
		h, w, n = addRune(h, w, n, r)
		i += sz
	}
	t.pos, t.lastN = i, uint32(min(n, 1<<32-1))
	return i, tokSum(h, w, n), true
}

// textMatch is one accepted lexicon match: the byte span in the text, the
// pattern (form) id, its entity and value (Lexicon.pent, pval) and the
// entity id's span in the ents arena.
type textMatch struct {
	start, end int
	pat        uint32
	ent, val   uint32
	eOff, eEnd uint32
}

// linkWindow is the most text tokens kept behind the current start before
// the token window slides; with the longest form's tokens ahead of it, it
// bounds the linker's memory independently of the text length.
const linkWindow = 4096

// linker is the scratch state of one match run. It is reused across texts
// (pooled for Link, owned by a Matcher) and is not safe for concurrent
// use.
type linker struct {
	tz    tokenizer
	start int     // byte offset where window token 0 starts
	toks  []token // the window of tokens
	found []textMatch
	cand  []candidate
	ents  []string
}

// token is one text token: where it ends, the hash of its folded bytes,
// whether it is a word token, and whether it is pure ASCII (then its
// folded length is its byte length, for Lexicon.mayStartShape).
type token struct {
	end   int
	h     uint64
	word  bool
	ascii bool
}

// candidate is a walk position where the table holds a form: verified
// only if no longer candidate of the walk verifies.
type candidate struct {
	j   int
	key uint64
	v   uint32
}

var linkerPool = sync.Pool{New: func() any { return new(linker) }}

func (m *linker) fill(k int) bool {
	if len(m.toks) < k {
		m.scan(k + 64)
	}
	return len(m.toks) >= k
}

// scan appends tokens until there are want or the text ends. Pure ASCII
// word runs and ASCII separators are cut here, inline; a token with other
// bytes goes through tokenizer.next.
func (m *linker) scan(want int) {
	t := &m.tz
	s, i, seed := t.text, t.pos, t.seed
	toks := m.toks // a local slice: appends need not reload m.toks
	for len(toks) < want && i < len(s) {
		c := s[i]
		if c < utf8.RuneSelf && !t.perRune {
			lc := wordLower[c]
			if lc == 0 {
				i++
				toks = append(toks, token{i, tokSum(seed, uint64(c), 1), false, true}) // not a letter: already folded
				continue
			}
			j := i + 1
			h, w, n := seed, uint64(lc), uint64(1)
			for ; j < len(s); j++ {
				lc = scanClass[s[j]]
				if lc == 0 || lc == nonASCII {
					if lc == nonASCII {
						if r, _ := utf8.DecodeRune(s[j:]); isWordRune(unicode.ToLower(r)) {
							break // a non-ASCII word rune: the slow path cuts this token
						}
					}
					toks = append(toks, token{j, tokSum(h, w, n), true, true})
					i = j
					goto next
				}
				w = w<<8 | uint64(lc)
				n++
				if n&7 == 0 {
					h, w = hashStep(h, w), 0
				}
			}
			if j == len(s) {
				toks = append(toks, token{j, tokSum(h, w, n), true, true})
				i = j
				continue
			}
		}
		t.pos = i
		{
			end, h, w := t.next()
			toks = append(toks, token{end, h, w, false})
			i = end
		}
	next:
	}
	t.pos = i
	m.toks = toks
}

func (m *linker) tokStart(j int) int {
	if j == 0 {
		return m.start
	}
	return m.toks[j-1].end
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
	m.toks, m.found = m.toks[:0], m.found[:0]
	skipSep := !l.firstSep && !l.perRune
	for i := 0; m.fill(i + 1); {
		if i >= linkWindow {
			m.start = m.toks[i-1].end
			m.toks = m.toks[:copy(m.toks, m.toks[i:])]
			i = 0
		}
		if skipSep && !m.toks[i].word {
			i++ // no form starts with a separator
			continue
		}
		if tk := m.toks[i]; tk.ascii {
			start := m.tokStart(i)
			if !l.mayStartShape(scanFold[text[start]], uint32(tk.end-start)) {
				i++ // no form's first token has this first byte and length
				continue
			}
		}
		key := chainKey(l.seed, m.toks[i].h)
		if !l.mayStart(key) {
			i++ // no form starts with this token
			continue
		}
		m.cand = m.cand[:0]
		for j := i; ; {
			v, ok := l.lookup(key)
			if ok && v&(patMask|overBit) != 0 {
				m.cand = append(m.cand, candidate{j, key, v})
			}
			// Go on while the tokens so far are a proper prefix of a form;
			// a separator followed by a word token has no entry of its own
			// in the table (see Lexicon.add): step over it to the word.
			more := ok && v&childBit != 0 || !l.perRune && !m.toks[j].word && m.fill(j+2) && m.toks[j+1].word
			if !more || !m.fill(j+2) {
				break
			}
			j++
			key = chainKey(key, m.toks[j].h)
		}
		// The longest candidate whose bytes spell its form wins; verifying
		// from the longest down costs one comparison but for a hash
		// collision.
		next := i + 1
		for c := len(m.cand) - 1; c >= 0; c-- {
			cd := m.cand[c]
			// The entity and value of the likely pattern are read before
			// the bytes are compared, so that these reads overlap the
			// form's.
			q := cd.v & patMask
			var ent, val uint32
			if q != 0 {
				ent, val = l.pent[q-1], l.pval[q-1]
			}
			eOff, eEnd := l.ents.off[ent], l.ents.off[ent+1]
			p, ok := l.verify(cd.key, cd.v, text[m.tokStart(i):m.toks[cd.j].end])
			if !ok {
				continue
			}
			if p+1 != q {
				ent, val = l.pent[p], l.pval[p]
				eOff, eEnd = l.ents.off[ent], l.ents.off[ent+1]
			}
			m.found = append(m.found, textMatch{m.tokStart(i), m.toks[cd.j].end, p, ent, val, eOff, eEnd})
			if !all {
				next = cd.j + 1
				break
			}
		}
		i = next
	}
}

// mayStartShape reports whether some form's first token has first folded
// byte c0 and folded length n (lengths of 63 bytes and more share one bit):
// a check in two words of the Lexicon itself, before the first-token
// filter's memory is touched. No false negatives.
func (l *Lexicon) mayStartShape(c0 byte, n uint32) bool {
	return l.firstByte[c0>>6]&(1<<(c0&63)) != 0 && l.firstLen&(1<<min(n, 63)) != 0
}

// mayStart reports whether some form may start with the token whose
// one-token key is key: a bit of the first-token filter (no false
// negatives; false positives only cost a table probe).
func (l *Lexicon) mayStart(key uint64) bool {
	b := key >> l.firstShift
	return l.first[b>>6]&(1<<(b&63)) != 0
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
		m.ents = append(m.ents, l.entityAt(f))
	}
	slices.Sort(m.ents)
	return slices.Clone(slices.Compact(m.ents))
}

// entityAt is the entity id of match f, a string into the ents arena.
func (l *Lexicon) entityAt(f textMatch) string { return bstr(l.ents.arena[f.eOff:f.eEnd]) }

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
