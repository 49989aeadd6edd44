package corpus

import (
	"errors"
	"slices"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// mustLexicon parses a lexicon TSV or fails the test.
func mustLexicon(t testing.TB, tsv string) *graphidx.Lexicon {
	t.Helper()
	l, err := graphidx.ParseLexicon(strings.NewReader(tsv), "lex.tsv")
	if err != nil {
		t.Fatal(err)
	}
	return l
}

// TestMaxContextEntities: a context over the limit is a counted bad line
// naming file and line (JSONL, CSV, text), an error in strict mode. (The
// builder's handling of wide contexts from other readers is tested in
// graphidx.)
func TestMaxContextEntities(t *testing.T) {
	t.Parallel()
	jsonl := `{"id":"a","ents":["p1","p2"]}` + "\n" + `{"id":"wide","ents":["p1","p2","p3","p4"]}` + "\n" + `{"id":"b","ents":["p1","p3","p4"]}` + "\n"
	csv := "context,entity\nc1,p1\nw,p1\nw,p2\nc1,p2\nw,p3\nw,p4\nc2,p3\n"
	text := "p1 and p2\n\n\nthe wide one:\np1 p2, p3\nand p4 p1\n\np1 p3 p4\n"
	lex, err := graphidx.ParseLexicon(strings.NewReader("p1\tp1\np2\tp2\np3\tp3\np4\tp4\n"), "lex.tsv")
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name, in string
		open     func(string, ...ReadOption) graphidx.ContextReader
		line     int
		skipped  int64
	}{
		{"jsonl", jsonl, func(s string, o ...ReadOption) graphidx.ContextReader {
			return NewJSONLReader(strings.NewReader(s), "c.jsonl", o...)
		}, 2, 1},
		{"csv", csv, func(s string, o ...ReadOption) graphidx.ContextReader {
			return NewCSVReader(strings.NewReader(s), "c.csv", o...)
		}, 3, 4},
		{"text", text, func(s string, o ...ReadOption) graphidx.ContextReader {
			return NewTextReader(strings.NewReader(s), "c.txt", lex, o...)
		}, 4, 1},
	} {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			r := tc.open(tc.in, graphidx.WithMaxContextEntities(3))
			got, err := readAll(t, r)
			if err != nil {
				t.Fatal(err)
			}
			st := r.(graphidx.StatsReader).Stats()
			if st.Skipped[graphidx.ReasonTooManyEntities] != tc.skipped || len(got) != 2 {
				t.Errorf("contexts %q, skipped %v", got, st.Skipped)
			}
			if e := st.FirstBad[graphidx.ReasonTooManyEntities]; e == nil || e.Line != tc.line {
				t.Errorf("first bad %v, want line %d", e, tc.line)
			}
			var le *graphidx.LineError
			_, err = readAll(t, tc.open(tc.in, graphidx.WithMaxContextEntities(3), graphidx.WithPolicy(graphidx.Strict)))
			if !errors.As(err, &le) || le.Reason != graphidx.ReasonTooManyEntities || le.Line != tc.line {
				t.Errorf("strict: %v", err)
			}
			if got, err := readAll(t, tc.open(tc.in, graphidx.WithMaxContextEntities(0))); err != nil || len(got) != 3 {
				t.Errorf("no limit: %q %v", got, err)
			}
		})
	}
}

// TestHostileNames: control characters, lone surrogates and case-variant
// keys are rejected naming the line and the reason.
func TestHostileNames(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		line, reason string
	}{
		{`{"id":"c","ents":["vent\u001b[2J"]}`, graphidx.ReasonControlChar},
		{`{"id":"c","obs":{"vent":"op\u0085en"}}`, graphidx.ReasonControlChar},
		{`{"id":"c\u007f","ents":["vent"]}`, graphidx.ReasonControlChar},
		{`{"id":"c","ents":["zone-\ud800"]}`, graphidx.ReasonBadUTF8},
		{`{"id":"c","ents":["zone-\udc00\ud800"]}`, graphidx.ReasonBadUTF8},
		{`{"id":"c","ents":["zone-\ud800x"]}`, graphidx.ReasonBadUTF8},
		{`{"id":"c","ents":["a"],"ID":"d"}`, graphidx.ReasonBadField},
		{`{"id":"c","Obs":{"a":"1"},"ents":["b"]}`, graphidx.ReasonBadField},
		{`{"id":"c","ENTS":["a"],"ents":["b"]}`, graphidx.ReasonBadField},
	} {
		in := `{"id":"ok","ents":["zone-\ud83c\udf31","pump"]}` + "\n" + tc.line + "\n"
		got, err := readAll(t, NewJSONLReader(strings.NewReader(in), "h.jsonl"))
		if err != nil || len(got) != 1 || !strings.Contains(got[0], "zone-\U0001F331") {
			t.Errorf("%s: lenient read %q %v", tc.line, got, err)
		}
		_, err = readAll(t, NewJSONLReader(strings.NewReader(in), "h.jsonl", graphidx.WithPolicy(graphidx.Strict)))
		var le *graphidx.LineError
		if !errors.As(err, &le) || le.Reason != tc.reason || le.Line != 2 {
			t.Errorf("%s: strict %v, want h.jsonl:2 %s", tc.line, err, tc.reason)
			continue
		}
		if msg := le.Error(); strings.ContainsAny(msg, "\x1b\x7f") || strings.Contains(msg, "\u0085") {
			t.Errorf("%s: error message carries a raw control character: %q", tc.line, msg)
		}
	}
	csv := "context,entity,value\nc1,vent,open\nc1,\"bed\x1b]0;x\x07\",dry\n"
	_, err := readAll(t, NewCSVReader(strings.NewReader(csv), "h.csv", graphidx.WithPolicy(graphidx.Strict)))
	var le *graphidx.LineError
	if !errors.As(err, &le) || le.Reason != graphidx.ReasonControlChar || le.Line != 3 {
		t.Errorf("csv: %v", err)
	}
}

// TestCSVOpenQuoteNamesSwallowedLines: a quote that never closes reports
// the lines it swallowed.
func TestCSVOpenQuoteNamesSwallowedLines(t *testing.T) {
	t.Parallel()
	in := "context,entity,value\nc1,vent,open\nc2,\"pump,on\nc3,bed,dry\nc4,bed,wet\nc5,fan,off\n"
	r := NewCSVReader(strings.NewReader(in), "q.csv")
	if _, err := readAll(t, r); err != nil {
		t.Fatal(err)
	}
	e := r.Stats().FirstBad[graphidx.ReasonBadQuote]
	if e == nil || e.Line != 3 || !strings.Contains(e.Detail, "lines 4-6") || !strings.Contains(e.Detail, "3 lines") {
		t.Errorf("bad-quote error %v: want line 3 naming the swallowed lines 4-6", e)
	}
}

// TestTextReaderValues: the value rules of the text reader (a stated value,
// an unvalued mention left out, two values a conflict naming its line).
func TestTextReaderValues(t *testing.T) {
	t.Parallel()
	l := mustLexicon(t, "moisture probe\tprobe\nprobe reads wet\tprobe\treads-wet\nprobe reads dry\tprobe\treads-dry\n"+
		"vent 3\tvent3\n")
	text := "Probe reads wet near vent 3; the moisture probe again.\n\n" + // probe=reads-wet (value-less mention ignored)
		"The moisture probe near vent 3.\n\n" + // probe left out (no value stated): Unvalued
		"probe reads wet at dawn,\nprobe reads dry at noon, vent 3.\n\n" + // two values: conflicting-values at line 6
		"the moisture probe alone\n" // only an unvalued mention: Empty
	r := NewTextReader(strings.NewReader(text), "log.txt", l)
	got, err := readAll(t, r)
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"log.txt#p1:probe=reads-wet,vent3=present", "log.txt#p2:vent3=present"}
	if !slices.Equal(got, want) {
		t.Errorf("got %q\nwant %q", got, want)
	}
	st := r.Stats()
	if st.Records != 4 || st.OK != 2 || st.Empty != 1 || st.Skipped[graphidx.ReasonConflictingValues] != 1 || st.Unvalued != 2 {
		t.Errorf("stats %+v", st)
	}
	checkReconcile(t, st)
	fb := st.FirstBad[graphidx.ReasonConflictingValues]
	if fb == nil || fb.Line != 6 || !strings.Contains(fb.Detail, `"probe" = "reads-wet" ("probe reads wet") and "reads-dry" ("probe reads dry")`) {
		t.Errorf("conflict error %v", fb)
	}
	_, err = readAll(t, NewTextReader(strings.NewReader(text), "log.txt", l, graphidx.WithPolicy(graphidx.Strict)))
	if le := (*graphidx.LineError)(nil); !errors.As(err, &le) || le.Reason != graphidx.ReasonConflictingValues || le.Line != 6 {
		t.Errorf("strict: %v", err)
	}
}
