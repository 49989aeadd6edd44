package graphidx

import (
	"errors"
	"fmt"
	"runtime"
	"slices"
	"strings"
	"sync"
	"testing"
)

func mustLexicon(t testing.TB, s string) *Lexicon {
	t.Helper()
	l, err := ParseLexicon(strings.NewReader(s), "lex.tsv")
	if err != nil {
		t.Fatal(err)
	}
	return l
}

func TestLexiconErrors(t *testing.T) {
	t.Parallel()
	for _, c := range []struct{ in, want string }{
		{"a\tx\nb\n", "lex.tsv:2: too-few-columns: 1 column, want surface form<TAB>entity id or"},
		{"a\tx\ty\tz\n", "lex.tsv:1: too-many-columns: 4 columns"},
		{"a\tx\ty\t\n", "lex.tsv:1: too-many-columns: 4 columns"},
		{"\tx\n", "lex.tsv:1: surface: empty-name"},
		{"a\t\n", "lex.tsv:1: entity: empty-name"},
		{"# c\na\tx\t \n", "lex.tsv:2: value: empty-name: the third column is empty"},
		{"a\tx\t\xff\n", "lex.tsv:1: value: bad-utf8"},
		{"a\t" + strings.Repeat("e", MaxNameBytes+1) + "\n", "lex.tsv:1: entity: name-too-long"},
		{"# only comments\n\n", "lex.tsv:2: empty-lexicon: no surface form lines"},
		{"", "lex.tsv: empty-lexicon: no surface form lines"}, // no line 0
		{"\xef\xbb\xbf\n", "lex.tsv:1: empty-lexicon"},
	} {
		_, err := ParseLexicon(strings.NewReader(c.in), "lex.tsv")
		var le *LineError
		if err == nil || !strings.HasPrefix(err.Error(), c.want) || !errors.As(err, &le) {
			t.Errorf("%q: got %v, want a *LineError with prefix %q", c.in, err, c.want)
		}
	}
}

// TestLexiconByteOrderMark: a UTF-8 byte-order mark at the start of the
// file (editors and spreadsheets on some systems write one) is not part of
// the first surface form. It used to be kept, so the first form silently
// never matched. Elsewhere U+FEFF stays a character of its field.
func TestLexiconByteOrderMark(t *testing.T) {
	t.Parallel()
	l := mustLexicon(t, "\xef\xbb\xbfbed 8 probe dry\tbed-8/probe\treads-dry\nleaf wilt\tbed-7/leaf-wilt\n")
	ms, err := l.Link("bed 8 probe dry; leaf wilt?")
	if err != nil || len(ms) != 2 || ms[0].Entity != "bed-8/probe" || ms[0].Value != "reads-dry" {
		t.Errorf("Link after a BOM: %+v, %v; want the first form found", ms, err)
	}
	if got := l.DisplayName("bed-8/probe"); got != "bed 8 probe dry" {
		t.Errorf("display name %q", got)
	}
	l = mustLexicon(t, "a\tx\n\xef\xbb\xbfb\ty\n")
	if ms, _ := l.Link("b"); len(ms) != 0 {
		t.Errorf("a BOM on line 2 is part of the form, got %+v", ms)
	}
}

func TestLexiconCollisionsCounted(t *testing.T) {
	t.Parallel()
	l := mustLexicon(t, "Vent\tv1\n"+ // kept
		"vent\tv1\n"+ // duplicate: same folded form, same target
		"VENT\tv2\n"+ // collision: other entity (first listed wins)
		"probe reads wet\tprobe\treads-wet\n"+
		"Probe Reads Wet\tprobe\treads-dry\n"+ // collision: other value
		"probe reads wet\tprobe\n"+ // collision: same entity without value
		"probe\tprobe\n")
	st := l.Stats()
	if st.Forms != 3 || st.Entities != 2 || st.Duplicates != 1 || st.Collisions != 3 || st.ValuedForms != 1 || st.Values != 1 || st.Lines != 7 {
		t.Errorf("stats %+v", st)
	}
	fc := st.FirstCollision
	if fc == nil || fc.Line != 3 || fc.Reason != ReasonDuplicateSurface || !strings.Contains(fc.Detail, `"VENT" names "v2" here but was listed earlier for "v1"`) {
		t.Errorf("first collision %v", fc)
	}
	ms, err := l.Link("the vent and the PROBE READS WET")
	if err != nil {
		t.Fatal(err)
	}
	if len(ms) != 2 || ms[0].Entity != "v1" || ms[1].Entity != "probe" || ms[1].Value != "reads-wet" || !ms[1].HasValue {
		t.Errorf("first listed must win: %+v", ms)
	}
	if l.DisplayName("v2") != "" {
		t.Errorf("v2 has no kept form, so no display name: %q", l.DisplayName("v2"))
	}
}

// TestAhoCorasickUshers checks the all-matches mode against the example of
// Aho and Corasick, "Efficient string matching: an aid to bibliographic
// search", Communications of the ACM 18(6):333–340, 1975: keywords {he, she,
// his, hers} in the text "ushers" give the outputs {he, she} at position 4
// and {hers} at position 6 (1-based end positions, as printed in the paper).
func TestAhoCorasickUshers(t *testing.T) {
	t.Parallel()
	l, err := parseLexicon(strings.NewReader("he\the\nshe\tshe\nhis\this\nhers\thers\n"), "kw.tsv", true)
	if err != nil {
		t.Fatal(err)
	}
	var m linker
	m.run(l, []byte("ushers"), true)
	got := map[int][]string{}
	for _, f := range m.found {
		got[f.end] = append(got[f.end], l.ents.str(l.pent[f.pat]))
	}
	for _, v := range got {
		slices.Sort(v)
	}
	want := map[int][]string{4: {"he", "she"}, 6: {"hers"}}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("outputs by end position %v, want %v (Aho & Corasick 1975)", got, want)
	}
	// With word boundaries none of them is a word of "ushers".
	if ms, _ := mustLexicon(t, "he\the\nshe\tshe\nhis\this\nhers\thers\n").Link("ushers"); len(ms) != 0 {
		t.Errorf("word mode matched inside a word: %+v", ms)
	}
}

func TestLinkRules(t *testing.T) {
	t.Parallel()
	l := mustLexicon(t, "zone 2\tzone-2\nzone 2 vent\tzone-2/vent\nre-\tprefix-re\nre-use\treuse\n"+
		"@ops\tops\nC++\tcpp\nİstanbul\tist\nbed  4\tbed-4\n")
	for _, c := range []struct {
		text string
		want []string // entity@surface
	}{
		{"zone 2 vent, zone 2, zone 2x, xzone 2", []string{"zone-2/vent@zone 2 vent", "zone-2@zone 2"}},
		{"re-use and re-do", []string{"reuse@re-use", "prefix-re@re-"}},
		{"a @ops, @opsx, x@ops", []string{"ops@@ops", "ops@@ops"}},
		// A form ending in a non-word rune has no end boundary: "C++x" names it.
		{"c++ and C++x", []string{"cpp@c++", "cpp@C++"}},
		// İ (2 bytes) folds to i (1 byte): spans must stay in the original text.
		{"İSTANBUL ve istanbul", []string{"ist@İSTANBUL", "ist@istanbul"}},
		{"bed 4 and bed  4", []string{"bed-4@bed  4"}},
	} {
		ms, err := l.Link(c.text)
		if err != nil {
			t.Fatal(err)
		}
		var got []string
		for _, m := range ms {
			if c.text[m.Start:m.End] != m.Surface {
				t.Errorf("%q: span %d:%d is not %q", c.text, m.Start, m.End, m.Surface)
			}
			got = append(got, m.Entity+"@"+m.Surface)
		}
		if !slices.Equal(got, c.want) {
			t.Errorf("%q: got %q, want %q", c.text, got, c.want)
		}
	}
	long := strings.Repeat("x", 10<<20)
	if _, err := l.Link(long); !errors.Is(err, ErrTextTooLong) {
		t.Errorf("10 MB prompt: %v", err)
	}
	if _, err := l.Link("zone 2 \xc3("); !errors.Is(err, ErrInvalidText) || !strings.Contains(err.Error(), "offset 7") {
		t.Errorf("invalid UTF-8: %v, want ErrInvalidText naming offset 7", err)
	}
}

func TestLinkValues(t *testing.T) { // not parallel: AllocsPerRun
	l := mustLexicon(t, "moisture probe\tbed-11/moisture-probe\nprobe reads wet\tbed-11/moisture-probe\treads-wet\n"+
		"probe reads dry\tbed-11/moisture-probe\treads-dry\n")
	ms, err := l.AppendLinks(make([]Mention, 0, 4), "The moisture probe: probe reads wet.")
	if err != nil {
		t.Fatal(err)
	}
	if len(ms) != 2 || ms[0].HasValue || ms[1].Value != "reads-wet" || !ms[1].HasValue || ms[1].Surface != "probe reads wet" {
		t.Errorf("mentions %+v", ms)
	}
	if allocs := testing.AllocsPerRun(100, func() { ms, _ = l.AppendLinks(ms[:0], "The moisture probe: probe reads wet.") }); allocs != 0 && !poolDrops() {
		t.Errorf("AppendLinks allocates %.1f times per call", allocs)
	}
}

// poolDrops reports whether sync.Pool drops items it was given, as it does
// on purpose under the race detector; allocation counts then mean nothing.
func poolDrops() bool {
	var p sync.Pool
	for range 100 {
		x := new(int)
		p.Put(x)
		if p.Get() != x {
			return true
		}
	}
	return false
}

// nestedForms is the hostile lexicon of nested forms "x", "x x", "x x x", …
// (n forms) and a paragraph of tokens "x" tokens.
func nestedForms(n, tokens int) (lex, text string) {
	var b strings.Builder
	for i := 1; i <= n; i++ {
		b.WriteString(strings.TrimSpace(strings.Repeat("x ", i)))
		fmt.Fprintf(&b, "\tx%d\n", i)
	}
	return b.String(), strings.TrimSpace(strings.Repeat("x ", tokens))
}

// TestLinkNestedFormsBounded: 2,047 nested forms against 40,000 "x" tokens
// (the input that made an all-overlaps matcher run out of memory) give the
// greedy leftmost-longest cover, with scratch memory that does not grow
// with the number of overlapping matches (2,047 per token).
func TestLinkNestedFormsBounded(t *testing.T) {
	if testing.Short() {
		t.Skip("builds a 2,047-form nested lexicon")
	}
	lexText, text := nestedForms(2047, 40000)
	l := mustLexicon(t, lexText)
	if st := l.Stats(); st.MaxFormTokens != 2*2047-1 {
		t.Fatalf("max form tokens %d", st.MaxFormTokens)
	}
	var before, after runtime.MemStats
	runtime.ReadMemStats(&before)
	ms, err := l.Link(text)
	runtime.ReadMemStats(&after)
	if err != nil {
		t.Fatal(err)
	}
	// 40000 = 19·2047 + 1107.
	if len(ms) != 20 || ms[0].Entity != "x2047" || ms[18].Entity != "x2047" || ms[19].Entity != "x1107" {
		t.Fatalf("%d mentions, first %v, last %v", len(ms), ms[0].Entity, ms[len(ms)-1].Entity)
	}
	if alloc := after.TotalAlloc - before.TotalAlloc; alloc > 4<<20 {
		t.Errorf("linking allocated %d bytes", alloc)
	}
}

// TestLexiconMemBytesMeasured: Stats().MemBytes agrees with the heap the
// lexicon holds, measured with runtime.MemStats after GC.
func TestLexiconMemBytesMeasured(t *testing.T) {
	if testing.Short() {
		t.Skip("loads a 200k-form lexicon")
	}
	const n = 200_000
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	l, err := ParseLexicon(newGreenhouseLexicon(n, 10), "gen.tsv")
	if err != nil {
		t.Fatal(err)
	}
	runtime.GC()
	runtime.ReadMemStats(&after)
	heap := int64(after.HeapAlloc) - int64(before.HeapAlloc)
	st := l.Stats()
	runtime.KeepAlive(l)
	t.Logf("%d forms: MemBytes %d (%.1f B/form), heap %d (%.1f B/form)", st.Forms, st.MemBytes,
		float64(st.MemBytes)/n, heap, float64(heap)/n)
	if st.Forms != n {
		t.Fatalf("forms %d", st.Forms)
	}
	if d := float64(heap-st.MemBytes) / float64(st.MemBytes); d > 0.1 || d < -0.1 {
		t.Errorf("MemBytes %d is off the measured heap %d by %.0f%%", st.MemBytes, heap, 100*d)
	}
	if per := float64(heap) / n; per > 150 {
		t.Errorf("%.1f heap bytes per form, want ≤ 150", per)
	}
}

// TestLinkConcurrent: one lexicon links from many goroutines at once (run
// with -race) and every result equals the sequential one.
func TestLinkConcurrent(t *testing.T) {
	t.Parallel()
	l, err := ParseLexicon(newGreenhouseLexicon(2000, 3), "gen.tsv")
	if err != nil {
		t.Fatal(err)
	}
	prompts := make([]string, 16)
	want := make([][]Mention, len(prompts))
	for i := range prompts {
		prompts[i] = greenhousePrompt(uint64(i), 600, 50)
		if want[i], err = l.Link(prompts[i]); err != nil || len(want[i]) == 0 {
			t.Fatalf("prompt %d: %v, %d mentions", i, err, len(want[i]))
		}
	}
	var wg sync.WaitGroup
	errs := make(chan string, 8)
	for g := range 8 {
		wg.Go(func() {
			for k := range 200 {
				i := (g + k) % len(prompts)
				got, err := l.Link(prompts[i])
				if err != nil || !slices.Equal(got, want[i]) {
					errs <- fmt.Sprintf("goroutine %d prompt %d: %v", g, i, err)
					return
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for e := range errs {
		t.Error(e)
	}
}
