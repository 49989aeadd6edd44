package graphidx

import (
	"bytes"
	"fmt"
	"io"
	"math/bits"
	"math/rand/v2"
	"os"
	"slices"
	"strconv"

	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// ReasonDuplicateSurface names a lexicon line whose surface form (after case
// folding) is already listed for a different target (entity, or entity and
// value). The first listed target is kept; such lines are counted in
// LexiconStats.Collisions, never an error.
const ReasonDuplicateSurface = "duplicate-surface"

// ReasonEmptyLexicon: a lexicon file has no surface form line at all.
const ReasonEmptyLexicon = "empty-lexicon"

// maxPatterns bounds the number of distinct surface forms of one lexicon
// (the pattern id shares a 32-bit table word with two flags).
const maxPatterns = patMask - 1

// lexiconLineFormat is the expected line shape, quoted in column errors.
const lexiconLineFormat = "want surface form<TAB>entity id or surface form<TAB>entity id<TAB>value"

// Lexicon maps surface forms to entity ids, and optionally to a value of the
// entity, for the text reader and for linking prompts (Link). It is immutable
// after loading and safe for concurrent use.
//
// Representation. A surface form is case-folded and cut into tokens: a
// maximal run of word runes (letters, digits, '_') or one single other rune.
// Every token prefix of every form is one 64-bit key, a seeded hash chained
// over the token hashes, in one open-addressing table of 8-byte words (the
// key's low 32 bits as a tag, then flags|pattern); the folded forms, entity
// ids, values and display forms live in a few byte arenas indexed by 32-bit
// offsets. Matching walks this implicit trie from each token of the text
// (see Link). Memory is 8 bytes per table slot (about 1.43 slots per stored
// prefix), 12 bytes per form plus the folded form's bytes, per entity its
// id and 8–13 bytes (and its display form when that is not written in lower
// case), and a first-token filter of 8 KiB to 1 MiB: measured 70 bytes per
// form for 1,000,000 generated greenhouse forms. Stats().MemBytes is the exact sum of the allocated arrays; see
// docs/LINKING.md.
type Lexicon struct {
	seed    uint64
	perRune bool // every rune is a token, no word boundaries (all-matches check mode)

	// Prefix table while loading: linear probing, slot = ⌊key·len/2⁶⁴⌋,
	// key 0 is empty. finish packs it into table and drops it.
	keys []uint64
	vals []uint32 // childBit | overBit | (pattern+1)
	used int
	// table is the loaded prefix table, one 8-byte word per slot: the low
	// 32 bits of the key (its tag) above the table word, 0 when empty; same
	// slot rule. Keys with equal tags on one probe run share a word (their
	// flags and patterns merged, see pack): that only costs work, since a
	// match is always verified byte by byte.
	table   []uint64
	tagMask uint32 // the key bits a tag keeps: all but in tests of merging
	// over holds further patterns whose folded forms hash to a key already
	// holding another pattern (64-bit hash collisions; verified by bytes).
	over map[uint64][]uint32

	forms   []byte   // folded forms, concatenated
	formOff []uint32 // pattern p: forms[formOff[p]:formOff[p+1]]
	pent    []uint32 // pattern → entity index
	pval    []uint32 // pattern → value index + 1, 0 for a form without value

	ents   strTable
	values strTable
	// entDisp[e] is the display form of entity e: pattern p's folded form
	// when it is written in lower case (no dispBit), else (dispBit|k)
	// disp[dispOff[k]:dispOff[k+1]].
	entDisp []uint32
	disp    []byte
	dispOff []uint32
	valued  []bool // entity → some form of it carries a value

	firstSep bool // some form starts with a non-word token
	// first is a bit filter of the keys of the forms' first tokens, bit
	// key>>firstShift; firstKeys collects those keys while loading.
	first      []uint64
	firstShift uint
	firstKeys  []uint64
	// firstByte and firstLen are the shapes of the forms' first tokens:
	// bit c of firstByte is set when some first token's folded bytes start
	// with c, bit min(n, 63) of firstLen when one is n folded bytes long.
	firstByte [4]uint64
	firstLen  uint64
	stats     LexiconStats
}

// Table word flags.
const (
	childBit = 1 << 31 // the key is a proper prefix of some form
	overBit  = 1 << 30 // more patterns with this key are in Lexicon.over
	dispBit  = 1 << 31 // Lexicon.entDisp: an index of the disp arena
	patMask  = 1<<30 - 1
)

// LexiconStats describes a loaded lexicon.
type LexiconStats struct {
	Lines       int // lines read, comments and blank lines included
	Forms       int // distinct case-folded surface forms kept
	ValuedForms int // kept forms that state a value (third column)
	Entities    int // entities named by at least one kept form
	Values      int // distinct value labels
	// Duplicates counts lines repeating a kept form with the same target;
	// they change nothing.
	Duplicates int
	// Collisions counts lines whose folded form is already kept for a
	// different target (another entity, or the same entity with another or
	// no value). The first listed target wins; FirstCollision is the first
	// such line (reason duplicate-surface), nil when there is none.
	Collisions     int
	FirstCollision *LineError
	// MaxFormTokens is the most tokens in one form. Link's work per text
	// token is at most this many table probes.
	MaxFormTokens int
	// MemBytes is the heap the lexicon holds: the capacity of every array
	// and arena it owns, in bytes.
	MemBytes int64
}

// Len is the number of distinct surface forms.
func (l *Lexicon) Len() int { return len(l.pent) }

// Stats returns the lexicon's counts and memory.
func (l *Lexicon) Stats() LexiconStats { return l.stats }

// DisplayName is the first surface form listed for entity in the lexicon
// file, as written there (not case-folded), or "" when the lexicon does not
// name the entity. O(|entity|).
func (l *Lexicon) DisplayName(entity string) string {
	e, ok := l.ents.find(entity)
	if !ok {
		return ""
	}
	d := l.entDisp[e]
	if d&dispBit == 0 {
		return bstr(l.form(d))
	}
	k := d &^ dispBit
	return bstr(l.disp[l.dispOff[k]:l.dispOff[k+1]])
}

// LoadLexicon reads a lexicon TSV file; see ParseLexicon.
func LoadLexicon(path string) (*Lexicon, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ParseLexicon(f, path)
}

// ParseLexicon reads a lexicon as a stream of lines, each
//
//	surface form<TAB>entity id
//	surface form<TAB>entity id<TAB>value
//
// Blank lines and lines starting with '#' are ignored, and so is a UTF-8
// byte-order mark at the start of the file. Every field is
// trimmed of surrounding spaces and must be non-empty valid UTF-8 of at most
// MaxNameBytes. Surface forms are case-folded (unicode.ToLower per rune).
// Several forms may name one entity. A form with a value states that value
// of the entity ("probe reads wet" → moisture-probe = reads-wet); an entity
// with at least one such form is a valued entity (see the text reader of
// graphidx/corpus).
//
// Collision rule: when two lines give the same folded form different targets
// (entity, value), the first listed line wins and the later one is counted
// in Stats().Collisions (the first is kept in FirstCollision); repeating a
// form with the same target is counted in Duplicates. Neither is an error.
//
// Every error is a *LineError naming the file, the line and the field: a
// wrong number of columns (too-few-columns, too-many-columns), an empty,
// overlong or non-UTF-8 field, a line over 1 MiB, or a lexicon without
// entries (empty-lexicon). Loading costs O(Σ|line|) time, and memory as
// described on Lexicon.
func ParseLexicon(r io.Reader, name string) (*Lexicon, error) {
	return parseLexicon(r, name, false)
}

// parseLexicon is ParseLexicon; perRune selects the all-matches check mode
// (every rune its own token, no word boundaries).
func parseLexicon(r io.Reader, name string, perRune bool) (*Lexicon, error) {
	return parseLexiconTags(r, name, perRune, ^uint32(0))
}

// parseLexiconTags is parseLexicon keeping only the tagMask bits of each
// key's tag in the loaded table; tests narrow it to force merged words.
func parseLexiconTags(r io.Reader, name string, perRune bool, tagMask uint32) (*Lexicon, error) {
	lr := fileio.NewLineReader(r, 1<<20)
	l := newLexicon(perRune)
	l.tagMask = tagMask
	var (
		folded []byte
		tz     tokenizer
		keys   []uint64
		words  []bool
	)
	for {
		line, err := lr.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("%s:%d: %w", name, lr.Line+1, err)
		}
		le := func(field, reason, detail string) *LineError {
			return &LineError{File: name, Line: lr.Line, Field: field, Reason: reason, Detail: detail}
		}
		if lr.TooLong {
			return nil, le("", ReasonLineTooLong, "longer than 1 MiB")
		}
		if lr.Line == 1 {
			line = trimBOM(line)
		}
		t := bytes.TrimSpace(line)
		if len(t) == 0 || t[0] == '#' {
			continue
		}
		var f [3][]byte
		n := 0
		for rest := line; ; n++ {
			i := bytes.IndexByte(rest, '\t')
			if n == 3 {
				return nil, le("", ReasonTooManyColumns, fmt.Sprintf("%d columns, %s", bytes.Count(line, []byte{'\t'})+1, lexiconLineFormat))
			}
			if i < 0 {
				f[n] = rest
				n++
				break
			}
			f[n], rest = rest[:i], rest[i+1:]
		}
		if n < 2 {
			return nil, le("", ReasonTooFewColumns, "1 column, "+lexiconLineFormat)
		}
		form, ent, val := bytes.TrimSpace(f[0]), bytes.TrimSpace(f[1]), bytes.TrimSpace(f[2])
		for _, c := range []struct {
			field string
			b     []byte
		}{{"surface", form}, {"entity", ent}, {"value", val}} {
			if c.field == "value" && n == 2 {
				break
			}
			if why := CheckName(c.b); why != "" {
				detail := ""
				if c.field == "value" && why == ReasonEmptyName {
					detail = "the third column is empty; drop the trailing tab for a form without a value"
				}
				return nil, le(c.field, why, detail)
			}
		}
		// Tokenize the form with the matcher's own tokenizer.
		folded = foldCase(folded[:0], form)
		keys, words = keys[:0], words[:0]
		tz.reset(form, l.seed, perRune)
		key := l.seed
		var c0 byte
		var n0 uint32
		for tz.pos < len(form) {
			_, h, w := tz.next()
			if len(keys) == 0 {
				c0, n0 = tz.lastC0, tz.lastN
			}
			key = chainKey(key, h)
			keys = append(keys, key)
			words = append(words, w)
		}
		if e := l.add(folded, form, ent, val, n == 3, keys, words, le); e != nil {
			return nil, e
		}
		// Lines whose form was not kept add their shape too: a superset
		// only costs a filter check.
		l.firstByte[c0>>6] |= 1 << (c0 & 63)
		l.firstLen |= 1 << min(n0, 63)
	}
	if len(l.pent) == 0 {
		return nil, &LineError{File: name, Line: lr.Line, Reason: ReasonEmptyLexicon,
			Detail: "no surface form lines (" + lexiconLineFormat + ")"}
	}
	l.finish()
	l.stats.Lines = lr.Line
	return l, nil
}

func newLexicon(perRune bool) *Lexicon {
	l := &Lexicon{seed: rand.Uint64() | 1, perRune: perRune, tagMask: ^uint32(0)}
	l.ents.init()
	l.values.init()
	l.keys = make([]uint64, 1024)
	l.vals = make([]uint32, 1024)
	l.formOff = []uint32{0}
	l.dispOff = []uint32{0}
	return l
}

// add stores one lexicon line: form (folded, and as written) → ent[=val],
// with the chained keys of its token prefixes and whether each token is a
// word token.
func (l *Lexicon) add(folded, form, ent, val []byte, hasVal bool, keys []uint64, words []bool,
	le func(field, reason, detail string) *LineError) *LineError {
	full := keys[len(keys)-1]
	// The same folded form listed before?
	if p, ok := l.lookupForm(full, folded); ok {
		sameEnt := bytes.Equal(l.ents.bytes(l.pent[p]), ent)
		sameVal := (l.pval[p] == 0) == !hasVal && (!hasVal || bytes.Equal(l.values.bytes(l.pval[p]-1), val))
		if sameEnt && sameVal {
			l.stats.Duplicates++
			return nil
		}
		l.stats.Collisions++
		if l.stats.FirstCollision == nil {
			kept := strconv.Quote(l.ents.str(l.pent[p]))
			if l.pval[p] != 0 {
				kept += "=" + strconv.Quote(l.values.str(l.pval[p]-1))
			}
			here := strconv.Quote(string(ent))
			if hasVal {
				here += "=" + strconv.Quote(string(val))
			}
			l.stats.FirstCollision = le("surface", ReasonDuplicateSurface, fmt.Sprintf(
				"%s names %s here but was listed earlier for %s, which is kept", strconv.Quote(string(form)), here, kept))
		}
		return nil
	}
	if len(l.pent) >= maxPatterns || len(l.forms)+len(folded) > 1<<32-1 {
		return le("surface", "lexicon-too-large", fmt.Sprintf("more than %d forms or 4 GiB of forms", maxPatterns))
	}
	e, isNew, err := l.ents.intern(ent)
	if err != nil {
		return le("entity", "lexicon-too-large", err.Error())
	}
	p := uint32(len(l.pent))
	if isNew {
		switch {
		case bytes.Equal(form, folded):
			l.entDisp = append(l.entDisp, p) // shares the folded form's bytes
		case len(l.disp)+len(form) > 1<<32-1:
			return le("surface", "lexicon-too-large", "4 GiB of display forms")
		default:
			l.entDisp = append(l.entDisp, dispBit|uint32(len(l.dispOff)-1))
			l.disp = append(l.disp, form...)
			l.dispOff = append(l.dispOff, uint32(len(l.disp)))
		}
		l.valued = append(l.valued, false)
	}
	var v uint32
	if hasVal {
		vi, _, err := l.values.intern(val)
		if err != nil {
			return le("value", "lexicon-too-large", err.Error())
		}
		v = vi + 1
		l.valued[e] = true
		l.stats.ValuedForms++
	}
	l.forms = append(l.forms, folded...)
	l.formOff = append(l.formOff, uint32(len(l.forms)))
	l.pent = append(l.pent, e)
	l.pval = append(l.pval, v)
	m := len(keys)
	if m > l.stats.MaxFormTokens {
		l.stats.MaxFormTokens = m
	}
	if !words[0] {
		l.firstSep = true
	}
	l.firstKeys = append(l.firstKeys, keys[0])
	for k := 0; k < m-1; k++ {
		// A separator followed by a word token needs no entry of its own:
		// the walk steps over a miss there (see walk).
		if !l.perRune && !words[k] && words[k+1] {
			continue
		}
		l.setFlag(keys[k], childBit)
	}
	l.setPattern(full, p)
	return nil
}

// lookupForm returns the pattern whose folded form is folded, given its key.
func (l *Lexicon) lookupForm(key uint64, folded []byte) (uint32, bool) {
	v, ok := l.lookup(key)
	if !ok {
		return 0, false
	}
	if p := v & patMask; p != 0 && bytes.Equal(l.form(p-1), folded) {
		return p - 1, true
	}
	if v&overBit != 0 {
		for _, p := range l.over[key] {
			if bytes.Equal(l.form(p), folded) {
				return p, true
			}
		}
	}
	return 0, false
}

func (l *Lexicon) form(p uint32) []byte { return l.forms[l.formOff[p]:l.formOff[p+1]] }

// slot returns the slot of key: the one holding it, or the empty one where
// it would go.
func (l *Lexicon) slot(key uint64) int {
	n := uint64(len(l.keys))
	i, _ := bits.Mul64(key, n)
	for {
		k := l.keys[i]
		if k == key || k == 0 {
			return int(i)
		}
		if i++; i == n {
			i = 0
		}
	}
}

// lookup returns the table word of key. Expected O(1): the load is at most
// 0.7. Once loaded, one 8-byte word per probe (table).
func (l *Lexicon) lookup(key uint64) (uint32, bool) {
	if l.table != nil {
		i, w := l.home(key)
		return l.probeFrom(key, i, w)
	}
	i := l.slot(key)
	return l.vals[i], l.keys[i] != 0
}

// home returns key's home slot in the loaded table and the word there.
func (l *Lexicon) home(key uint64) (uint64, uint64) {
	i, _ := bits.Mul64(key, uint64(len(l.table)))
	return i, l.table[i]
}

// probeFrom finishes a loaded-table look-up of key from its home slot i
// holding word w.
func (l *Lexicon) probeFrom(key, i, w uint64) (uint32, bool) {
	t, tag := l.table, uint32(key)&l.tagMask
	for n := uint64(len(t)); ; w = t[i] {
		if w == 0 {
			return 0, false
		}
		if uint32(w>>32) == tag {
			return uint32(w), true
		}
		if i++; i == n {
			i = 0
		}
	}
}

// pack moves the loading table (keys, vals) into table. A key whose probe
// run meets a word of its tag (another key with the same low 32 bits)
// merges into it: the flags are or-ed, and when both hold a pattern the
// later one moves to over under its full key with overBit set, where
// verify finds it. Every walk then sees at least the flags it saw before,
// and any extra candidate is verified by its bytes, so matches do not
// change. O(slots).
func (l *Lexicon) pack() {
	n := uint64(len(l.keys))
	t := make([]uint64, n)
	for j, k := range l.keys {
		if k == 0 {
			continue
		}
		v := l.vals[j]
		i, _ := bits.Mul64(k, n)
		for {
			w := t[i]
			if w == 0 {
				t[i] = uint64(uint32(k)&l.tagMask)<<32 | uint64(v)
				break
			}
			if uint32(w>>32) == uint32(k)&l.tagMask {
				old := uint32(w)
				merged := old | v&(childBit|overBit)
				if p := v & patMask; p != 0 {
					if old&patMask == 0 {
						merged |= p
					} else {
						if l.over == nil {
							l.over = map[uint64][]uint32{}
						}
						l.over[k] = append(l.over[k], p-1)
						merged |= overBit
					}
				}
				t[i] = uint64(uint32(w>>32))<<32 | uint64(merged)
				break
			}
			if i++; i == n {
				i = 0
			}
		}
	}
	l.table, l.keys, l.vals = t, nil, nil
}

func (l *Lexicon) claim(key uint64) int {
	if 10*(l.used+1) > 7*len(l.keys) {
		l.rehash(2 * len(l.keys))
	}
	i := l.slot(key)
	if l.keys[i] == 0 {
		l.keys[i] = key
		l.used++
	}
	return i
}

func (l *Lexicon) setFlag(key uint64, flag uint32) { l.vals[l.claim(key)] |= flag }

func (l *Lexicon) setPattern(key uint64, p uint32) {
	i := l.claim(key)
	if l.vals[i]&patMask == 0 {
		l.vals[i] |= p + 1
		return
	}
	// Another form already hashes to this key (a 64-bit collision).
	l.vals[i] |= overBit
	if l.over == nil {
		l.over = map[uint64][]uint32{}
	}
	l.over[key] = append(l.over[key], p)
}

func (l *Lexicon) rehash(n int) {
	oldK, oldV := l.keys, l.vals
	l.keys, l.vals = make([]uint64, n), make([]uint32, n)
	for i, k := range oldK {
		if k != 0 {
			j := l.slot(k)
			l.keys[j], l.vals[j] = k, oldV[i]
		}
	}
}

// finish sizes the table to a load of 0.7, trims every array to its length
// and computes the statistics.
func (l *Lexicon) finish() {
	if want := l.used*10/7 + 1; want < len(l.keys)*9/10 {
		l.rehash(want)
	}
	l.pack()
	// The first-token filter: about 8 bits per distinct first token, between
	// 2^16 and 2^23 bits (8 KiB to 1 MiB, so that it stays in cache).
	slices.Sort(l.firstKeys)
	distinct := len(slices.Compact(l.firstKeys))
	logBits := min(max(bits.Len(uint(8*distinct)), 16), 23)
	l.first = make([]uint64, 1<<logBits/64)
	l.firstShift = uint(64 - logBits)
	for _, k := range l.firstKeys[:distinct] {
		b := k >> l.firstShift
		l.first[b>>6] |= 1 << (b & 63)
	}
	l.firstKeys = nil
	l.forms = slices.Clone(l.forms)
	l.formOff = slices.Clone(l.formOff)
	l.pent = slices.Clone(l.pent)
	l.pval = slices.Clone(l.pval)
	l.disp = slices.Clone(l.disp)
	l.dispOff = slices.Clone(l.dispOff)
	l.entDisp = slices.Clone(l.entDisp)
	l.valued = slices.Clone(l.valued)
	l.ents.trim()
	l.values.trim()
	s := &l.stats
	s.Forms = len(l.pent)
	s.Entities = l.ents.len()
	s.Values = l.values.len()
	mem := int64(8*cap(l.table) + 8*cap(l.first) + cap(l.forms) + 4*cap(l.formOff) + 4*cap(l.pent) + 4*cap(l.pval) +
		cap(l.disp) + 4*cap(l.dispOff) + 4*cap(l.entDisp) + cap(l.valued))
	for _, ps := range l.over {
		mem += 8 + 24 + 4*int64(cap(ps)) + 16 // key, slice header, elements, map overhead (estimate)
	}
	s.MemBytes = mem + l.ents.memBytes() + l.values.memBytes()
}

// trimBOM drops a UTF-8 byte-order mark from the start of a file's first
// line: editors and spreadsheet exports on some systems write one, and it
// is no part of the first name (RFC 8259 §8.1 lets a JSON parser ignore
// it). O(1).
func trimBOM(line []byte) []byte { return bytes.TrimPrefix(line, []byte("\xef\xbb\xbf")) }
