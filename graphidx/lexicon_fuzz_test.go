package graphidx

import (
	"bytes"
	"errors"
	"fmt"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
	"unicode"
	"unicode/utf8"
)

// fuzzAlphabet holds the pieces random lexicons and texts are made of:
// word and separator runes, runes whose lower case has another length
// (İ → i, K KELVIN SIGN → k), a combining mark (not a word rune), doubled
// spaces, and the lexicon's own tab and newline.
var fuzzAlphabet = []string{"a", "b", "ab", "A", "B", " ", " ", " ", "  ", "-", "_", "1", "İ", "i", "ß", "Σ",
	"σ", "ς", ".", "x", "é", "\u0301", "\u212a", "k", "+", "\t", "\n", "\t", "\n"}

func fromAlphabet(spec []byte, noControl bool) string {
	var b strings.Builder
	for _, c := range spec {
		p := fuzzAlphabet[int(c)%len(fuzzAlphabet)]
		if noControl && (p == "\t" || p == "\n") {
			p = " "
		}
		b.WriteString(p)
	}
	return b.String()
}

// bruteMention is one match of the reference matcher.
type bruteMention struct {
	Entity, Value string
	HasValue      bool
	Start, End    int
}

// bruteLink is the reference matcher, written from the rules alone: parse
// the lexicon lines (first listed folded form wins), fold the text rune by
// rune remembering each rune's original offset, find every occurrence of
// every folded form by plain substring search, keep those whose word-rune
// edges are not next to word runes, sort by start and longest first, and
// take them greedily without overlap. O(forms·|text|²).
func bruteLink(lex, text string) []bruteMention {
	type target struct {
		form, ent, val string
		hasVal         bool
	}
	var targets []target
	seen := map[string]bool{}
	for _, line := range strings.Split(lex, "\n") {
		if t := strings.TrimSpace(line); t == "" || t[0] == '#' {
			continue
		}
		f := strings.Split(line, "\t")
		tg := target{form: string(foldCase(nil, []byte(strings.TrimSpace(f[0])))), ent: strings.TrimSpace(f[1])}
		if len(f) == 3 {
			tg.val, tg.hasVal = strings.TrimSpace(f[2]), true
		}
		if !seen[tg.form] {
			seen[tg.form] = true
			targets = append(targets, tg)
		}
	}
	var folded []byte
	var orig []int // orig[k]: original offset of folded byte k (rune starts), len(folded)+1
	for i, r := range text {
		n := len(folded)
		folded = utf8.AppendRune(folded, unicode.ToLower(r))
		for range len(folded) - n {
			orig = append(orig, i)
		}
	}
	orig = append(orig, len(text))
	word := func(r rune) bool { return r == '_' || unicode.IsLetter(r) || unicode.IsDigit(r) }
	type span struct {
		s, e int
		t    target
	}
	var all []span
	for _, tg := range targets {
		first, _ := utf8.DecodeRuneInString(tg.form)
		last, _ := utf8.DecodeLastRuneInString(tg.form)
		for p := 0; p+len(tg.form) <= len(folded); p++ {
			if !utf8.RuneStart(folded[p]) || string(folded[p:p+len(tg.form)]) != tg.form {
				continue
			}
			e := p + len(tg.form)
			if r, _ := utf8.DecodeLastRune(folded[:p]); p > 0 && word(first) && word(r) {
				continue
			}
			if r, _ := utf8.DecodeRune(folded[e:]); e < len(folded) && word(last) && word(r) {
				continue
			}
			all = append(all, span{p, e, tg})
		}
	}
	slices.SortFunc(all, func(a, b span) int {
		if a.s != b.s {
			return a.s - b.s
		}
		return b.e - a.e
	})
	var out []bruteMention
	end := 0
	for _, sp := range all {
		if sp.s < end {
			continue
		}
		end = sp.e
		out = append(out, bruteMention{sp.t.ent, sp.t.val, sp.t.hasVal, orig[sp.s], orig[sp.e]})
	}
	return out
}

// checkLink compares Link with bruteLink on one lexicon and text and
// returns the number of mentions (-1 for a lexicon that does not parse).
func checkLink(t *testing.T, lex, text string) int {
	return checkLinkTags(t, lex, text, ^uint32(0))
}

// checkLinkTags is checkLink on a lexicon whose table tags keep only the
// tagMask bits of each key.
func checkLinkTags(t *testing.T, lex, text string, tagMask uint32) int {
	l, err := parseLexiconTags(strings.NewReader(lex), "lex.tsv", false, tagMask)
	if err != nil {
		var le *LineError
		if !errors.As(err, &le) || le.File != "lex.tsv" {
			t.Fatalf("lexicon error %v is not a *LineError naming the file", err)
		}
		return -1
	}
	ms, err := l.Link(text)
	if err != nil {
		t.Fatalf("Link(%q): %v", text, err)
	}
	var got []bruteMention
	for _, m := range ms {
		if m.Surface != text[m.Start:m.End] {
			t.Fatalf("surface %q is not text[%d:%d]", m.Surface, m.Start, m.End)
		}
		got = append(got, bruteMention{m.Entity, m.Value, m.HasValue, m.Start, m.End})
	}
	if want := bruteLink(lex, text); fmt.Sprint(got) != fmt.Sprint(want) {
		t.Fatalf("lexicon %q\ntext %q\nLink  %+v\nbrute %+v", lex, text, got, want)
	}
	return len(got)
}

// FuzzLink compares Link with the brute-force reference matcher on random
// lexicons and texts (spans, entities and values identical), and links a
// raw text for panics: invalid UTF-8 must be ErrInvalidText naming the first
// bad byte offset, and Match must agree with Link's entities.
func FuzzLink(f *testing.F) {
	f.Add([]byte{0, 5, 1, 25, 30, 26, 0, 5, 1, 5, 0, 25, 31, 26}, []byte{0, 5, 1, 5, 0, 5, 1}, []byte("a b\xffc"))
	f.Add([]byte{12, 25, 7, 26, 22, 25, 23, 26}, []byte{12, 13, 5, 22, 23}, []byte("İ\u212a"))
	f.Add([]byte{17, 5, 17, 25, 2, 26, 17, 25, 3, 26}, []byte{17, 5, 17, 5, 17}, []byte{})
	f.Fuzz(func(t *testing.T, lexSpec, textSpec, raw []byte) {
		if len(lexSpec) > 200 || len(textSpec) > 200 {
			return
		}
		lex, text := fromAlphabet(lexSpec, false), fromAlphabet(textSpec, true)
		checkLink(t, lex, text)
		l, err := ParseLexicon(strings.NewReader(lex+"\nab\tab\n"), "lex.tsv")
		if err != nil {
			return
		}
		ms, err := l.Link(string(raw))
		if !utf8.Valid(raw) {
			bad := 0
			for bad < len(raw) {
				r, n := utf8.DecodeRune(raw[bad:])
				if r == utf8.RuneError && n == 1 {
					break
				}
				bad += n
			}
			if !errors.Is(err, ErrInvalidText) || !strings.Contains(err.Error(), fmt.Sprintf("offset %d", bad)) {
				t.Fatalf("invalid UTF-8 %q: %v, want ErrInvalidText at offset %d", raw, err, bad)
			}
			l.Match(raw) // the text reader's path takes any bytes
			return
		}
		if err != nil {
			t.Fatal(err)
		}
		var ents []string
		for _, m := range ms {
			ents = append(ents, m.Entity)
		}
		slices.Sort(ents)
		if got := l.Match(raw); !slices.Equal(got, slices.Compact(ents)) {
			t.Fatalf("Match %q, Link entities %q", got, ents)
		}
	})
}

// TestLinkMatchesBruteForce runs the FuzzLink comparison on 3,000 seeded
// random lexicons and texts, so that plain "go test" covers it.
func TestLinkMatchesBruteForce(t *testing.T) {
	t.Parallel()
	linkMatchesBruteForce(t, ^uint32(0))
}

// TestLinkTagMergesMatchBruteForce: with table tags cut to 0 or 2 bits,
// nearly every key of a probe run shares one table word (flags and
// patterns merged, extra patterns in the over map), and an absent key reads
// some other key's word; Link must still give the reference matcher's
// mentions, since every candidate is verified by its bytes.
func TestLinkTagMergesMatchBruteForce(t *testing.T) {
	t.Parallel()
	for _, mask := range []uint32{0, 3} {
		t.Run(fmt.Sprintf("mask=%#x", mask), func(t *testing.T) {
			t.Parallel()
			linkMatchesBruteForce(t, mask)
		})
	}
}

func linkMatchesBruteForce(t *testing.T, tagMask uint32) {
	rng := rand.New(rand.NewPCG(7, 11))
	spec := func(n int) []byte {
		b := make([]byte, rng.IntN(n))
		for i := range b {
			b[i] = byte(rng.IntN(256))
		}
		return b
	}
	parsed, mentions := 0, 0
	for range 3000 {
		// Lexicons of a few short forms, and texts made of those forms (in
		// upper or lower case) between random pieces.
		var lex bytes.Buffer
		var forms []string
		for range 1 + rng.IntN(6) {
			form := strings.NewReplacer("\t", " ", "\n", " ").Replace(fromAlphabet(spec(6), false))
			forms = append(forms, form)
			lex.WriteString(form + "\te" + fmt.Sprint(rng.IntN(4)))
			if rng.IntN(3) == 0 {
				lex.WriteString("\tv" + fmt.Sprint(rng.IntN(3)))
			}
			lex.WriteString("\n")
		}
		var tb strings.Builder
		for range rng.IntN(12) {
			switch f := forms[rng.IntN(len(forms))]; rng.IntN(3) {
			case 0:
				tb.WriteString(f)
			case 1:
				tb.WriteString(strings.ToUpper(f))
			default:
				tb.WriteString(fromAlphabet(spec(4), true))
			}
		}
		text := tb.String()
		if n := checkLinkTags(t, lex.String(), text, tagMask); n >= 0 {
			parsed++
			mentions += n
		}
	}
	// The comparison must have had something to compare.
	if parsed < 1000 || mentions < 1000 {
		t.Errorf("only %d lexicons parsed, %d mentions in all", parsed, mentions)
	}
	t.Logf("%d lexicons parsed, %d mentions compared", parsed, mentions)
}

// TestLinkLongTextMatchesBruteForce: texts of 30,000+ tokens slide the
// linker's token window (linkWindow) many times, with forms straddling the
// slides; the mentions still equal the reference matcher's.
func TestLinkLongTextMatchesBruteForce(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(3, 5))
	lex := "a b\tab\na b a\taba\nb\tb\tv1\nİ a\tia\n-\tdash\n"
	pieces := []string{"a", "b", "İ", "i", " ", " ", "-", "x", "A"}
	var b strings.Builder
	for range 60000 {
		b.WriteString(pieces[rng.IntN(len(pieces))])
	}
	if n := checkLink(t, lex, b.String()); n < 5000 {
		t.Errorf("only %d mentions", n)
	}
}

// TestLinkHugeInputs: the text limits hold without panics.
func TestLinkHugeInputs(t *testing.T) {
	t.Parallel()
	l := mustLexicon(t, "a\tx\n")
	for _, c := range []struct {
		text string
		want error
	}{
		{strings.Repeat("a ", 5<<20), ErrTextTooLong}, // 10 MB
		{strings.Repeat("a ", MaxLinkBytes/2), nil},
		{"a \xe2\x82", ErrInvalidText},
	} {
		ms, err := l.Link(c.text)
		if !errors.Is(err, c.want) || (c.want != nil) != (ms == nil) {
			t.Errorf("%d bytes: %d mentions, %v; want %v", len(c.text), len(ms), err, c.want)
		}
	}
}
