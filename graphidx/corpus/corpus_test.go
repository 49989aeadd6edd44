package corpus

import (
	"errors"
	"fmt"
	"io"
	"maps"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// readAll drains a reader; obs are rendered "id:e=v,e=v" with entities
// sorted so tests do not depend on the reader's order.
func readAll(t testing.TB, r graphidx.ContextReader) ([]string, error) {
	t.Helper()
	var out []string
	for {
		c, err := r.Next()
		if err == io.EOF {
			return out, nil
		}
		if err != nil {
			return out, err
		}
		var parts []string
		for _, o := range c.Obs {
			parts = append(parts, o.Entity+"="+o.Value)
		}
		slices.Sort(parts)
		out = append(out, c.ID+":"+strings.Join(parts, ","))
	}
}

func checkReconcile(t *testing.T, s graphidx.ReadStats) {
	t.Helper()
	if s.Records != s.OK+s.Empty+s.SkippedTotal() {
		t.Errorf("records %d != ok %d + empty %d + skipped %d", s.Records, s.OK, s.Empty, s.SkippedTotal())
	}
}

// Each bad line is tagged with the reason the reader must give it.
var jsonlCases = []struct {
	line, reason string
}{
	{`{"id":"c1","obs":{"vent3":"open","zone2":"high"}}`, ""},
	{`{"id":"c2","ents":["pump1","bed4"]}`, ""},
	{`   `, "blank"},
	{`{"id":"c3","obs":{"vent3":"open"},"note":{"x":[1,2.5e3,true,null]}}`, ""},
	{`{"id":"c4","obs":{"vent\u0033":"op\"en"}}`, ""},
	{`{"id":"c5","obs":{"a":"1"}`, graphidx.ReasonBadJSON},
	{`not json`, graphidx.ReasonBadJSON},
	{`{"id":"c6","obs":{"a":"1"}} trailing`, graphidx.ReasonBadJSON},
	{`{"obs":{"a":"1"}}`, graphidx.ReasonMissingID},
	{`{"id":"","obs":{"a":"1"}}`, graphidx.ReasonMissingID},
	{`{"id":7,"obs":{"a":"1"}}`, graphidx.ReasonBadField},
	{`{"id":"c7","obs":{"a":1}}`, graphidx.ReasonBadField},
	{`{"id":"c8","ents":"a"}`, graphidx.ReasonBadField},
	{`{"id":"c9","ents":["a",2]}`, graphidx.ReasonBadField},
	{`{"id":"c10","id":"c10","ents":["a"]}`, graphidx.ReasonBadField},
	{`{"id":"c11","obs":{}}`, graphidx.ReasonEmptyContext},
	{`{"id":"c12"}`, graphidx.ReasonEmptyContext},
	{`{"id":"c13","obs":{"a":"1"},"ents":["b"]}`, graphidx.ReasonMixedForms},
	{`{"id":"c14","obs":{"a":"1","a":"2"}}`, graphidx.ReasonDuplicateEntity},
	{`{"id":"c15","ents":["a","b","a"]}`, graphidx.ReasonDuplicateEntity},
	{`{"id":"c16","obs":{"":"1"}}`, graphidx.ReasonEmptyName},
	{`{"id":"c17","obs":{"a":""}}`, graphidx.ReasonEmptyName},
	{"{\"id\":\"c18\",\"obs\":{\"a\xff\":\"1\"}}", graphidx.ReasonBadUTF8},
	{`{"id":"c19","obs":{"` + strings.Repeat("x", graphidx.MaxNameBytes+1) + `":"1"}}`, graphidx.ReasonNameTooLong},
	{`{"id":"c20","ents":["` + strings.Repeat("y", graphidx.MaxNameBytes+100) + `"]}`, graphidx.ReasonLineTooLong}, // longer than the limit below
	{`{"id":"c21","obs":{"a":"1"}}`, ""},
}

func TestJSONLReaderBadLines(t *testing.T) {
	t.Parallel()
	var b strings.Builder
	wantSkip := map[string]int64{}
	var wantOK int64
	firstBad := 0
	for i, c := range jsonlCases {
		b.WriteString(c.line + "\n")
		switch c.reason {
		case "":
			wantOK++
		case "blank":
		default:
			wantSkip[c.reason]++
			if firstBad == 0 {
				firstBad = i + 1
			}
		}
	}
	// Lenient: every bad line counted under its reason, totals reconcile.
	// c19 (a long name) must fit the line limit, c20 must not.
	r := NewJSONLReader(strings.NewReader(b.String()), "ctx.jsonl", WithMaxLineBytes(len(jsonlCases[23].line)))
	got, err := readAll(t, r)
	if err != nil {
		t.Fatal(err)
	}
	st := r.Stats()
	if !maps.Equal(st.Skipped, wantSkip) {
		t.Errorf("skipped %v, want %v", st.Skipped, wantSkip)
	}
	if st.OK != wantOK || int64(len(got)) != wantOK || st.Records != int64(len(jsonlCases)-1) || st.Lines != int64(len(jsonlCases)) {
		t.Errorf("stats %+v, contexts %d", st, len(got))
	}
	checkReconcile(t, st)
	want := []string{"c1:vent3=open,zone2=high", "c2:bed4=present,pump1=present", "c3:vent3=open", `c4:vent3=op"en`, "c21:a=1"}
	if !slices.Equal(got, want) {
		t.Errorf("got %q", got)
	}
	if e := st.FirstBad[graphidx.ReasonDuplicateEntity]; e == nil || e.Line != 19 || e.Field != "obs.a" {
		t.Errorf("first duplicate: %v", e)
	}
	// Strict: stops at the first bad line with file:line.
	r = NewJSONLReader(strings.NewReader(b.String()), "ctx.jsonl", graphidx.WithPolicy(graphidx.Strict))
	_, err = readAll(t, r)
	var le *graphidx.LineError
	if !errors.As(err, &le) || le.Line != firstBad || le.Reason != graphidx.ReasonBadJSON || !strings.HasPrefix(err.Error(), fmt.Sprintf("ctx.jsonl:%d: bad-json", firstBad)) {
		t.Errorf("strict: %v", err)
	}
}

func TestCSVReaderInterleaved(t *testing.T) {
	t.Parallel()
	// Rows of c1, c2, c3 interleaved; with the smallest budget every few rows
	// spill, so grouping goes through the k-way merge of runs.
	var b strings.Builder
	b.WriteString("\xef\xbb\xbfContext, Entity ,value\n")
	var want []string
	for c := range 40 {
		var obs []string
		for e := range 5 {
			obs = append(obs, fmt.Sprintf("e%d=v%d", e, (c+e)%3))
		}
		want = append(want, fmt.Sprintf("c%02d:%s", c, strings.Join(obs, ",")))
	}
	slices.Sort(want)
	for e := range 5 {
		for c := 39; c >= 0; c-- {
			fmt.Fprintf(&b, "c%02d,e%d,v%d\n", c, e, (c+e)%3)
		}
		b.WriteString("\n")
	}
	for _, budget := range []int64{graphidx.DefaultMemBudget, 512} {
		dir := t.TempDir()
		r := NewCSVReader(strings.NewReader(b.String()), "long.csv", withReadMemLimit(budget), graphidx.WithTempDir(dir))
		got, err := readAll(t, r)
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(got, want) {
			t.Errorf("budget %d: got %q", budget, got[:3])
		}
		if budget == 512 && r.SpillRuns() < 10 {
			t.Errorf("expected spilling, got %d runs", r.SpillRuns())
		}
		st := r.Stats()
		if st.Records != 200 || st.OK != 200 || st.Contexts != 40 {
			t.Errorf("stats %+v", st)
		}
		checkReconcile(t, st)
		if err := r.Close(); err != nil {
			t.Fatal(err)
		}
		if left, _ := os.ReadDir(dir); len(left) != 0 {
			t.Errorf("temp files left: %v", left)
		}
	}
}

func TestCSVReaderBadRows(t *testing.T) {
	t.Parallel()
	in := strings.Join([]string{
		"context,entity,value",
		"c1,vent3,open",                 // 2
		"c1,vent3,closed",               // 3 duplicate-entity (later row)
		"c2,pump1",                      // 4 too-few
		"c2,pump1,on,extra",             // 5 too-many
		`c2,"pump""1",on`,               // 6 ok: entity pump"1
		`c2,pu"mp,on`,                   // 7 bad-quote
		`c3,"multi`,                     // 8 quoted field over two lines: parsed, but
		`line",x`,                       // 9 the name holds a newline: control-char
		",bed4,present",                 // 10 missing-id
		"c4,,present",                   // 11 empty-name (entity)
		"c4,bed4,",                      // 12 empty-name (value)
		"c4,bed4,\xff",                  // 13 bad-utf8
		"c1,zone2,high",                 // 14 ok, non-contiguous with c1
		`c5,"open quote never closed,x`, // 15 bad-quote at EOF
	}, "\n") + "\n"
	r := NewCSVReader(strings.NewReader(in), "rows.csv")
	got, err := readAll(t, r)
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"c1:vent3=open,zone2=high", `c2:pump"1=on`}
	if !slices.Equal(got, want) {
		t.Errorf("got %q", got)
	}
	st := r.Stats()
	wantSkip := map[string]int64{graphidx.ReasonDuplicateEntity: 1, graphidx.ReasonTooFewColumns: 1, graphidx.ReasonTooManyColumns: 1,
		graphidx.ReasonBadQuote: 2, graphidx.ReasonMissingID: 1, graphidx.ReasonEmptyName: 2, graphidx.ReasonBadUTF8: 1, graphidx.ReasonControlChar: 1}
	if !maps.Equal(st.Skipped, wantSkip) {
		t.Errorf("skipped %v want %v", st.Skipped, wantSkip)
	}
	if st.Records != 13 || st.OK != 3 {
		t.Errorf("stats %+v", st)
	}
	checkReconcile(t, st)
	if e := st.FirstBad[graphidx.ReasonDuplicateEntity]; e == nil || e.Line != 3 || e.Field != "entity" {
		t.Errorf("duplicate reported as %v", e)
	}
	if e := st.FirstBad[graphidx.ReasonEmptyName]; e == nil || e.Line != 11 || e.Field != "entity" || e.Error() != "rows.csv:11: entity: empty-name" {
		t.Errorf("empty name reported as %v", e)
	}
	// Strict stops at line 4 (the duplicate at line 3 is found only when grouping).
	r = NewCSVReader(strings.NewReader(in), "rows.csv", graphidx.WithPolicy(graphidx.Strict))
	_, err = readAll(t, r)
	if le := (*graphidx.LineError)(nil); !errors.As(err, &le) || le.Line != 4 || le.Reason != graphidx.ReasonTooFewColumns {
		t.Errorf("strict: %v", err)
	}
	// Bad header is fatal in both modes.
	for _, h := range []string{"ctx,entity,value\n", "context,entity,value,extra\n", ""} {
		_, err := readAll(t, NewCSVReader(strings.NewReader(h+"c,e,v\n"), "h.csv"))
		if le := (*graphidx.LineError)(nil); !errors.As(err, &le) || le.Reason != graphidx.ReasonBadHeader {
			t.Errorf("header %q: %v", h, err)
		}
	}
	// Presence-only header.
	got, err = readAll(t, NewCSVReader(strings.NewReader("context,entity\nc1,a\nc1,b\n"), "p.csv"))
	if err != nil || !slices.Equal(got, []string{"c1:a=present,b=present"}) {
		t.Errorf("presence: %q %v", got, err)
	}
}

const testLexicon = `# surface form	entity
Zone 2	zone2
zone two	zone2
Vent 3	vent3
vent 3 motor	vent3.motor
CO2	co2
Über-Sensor	uber
pump	pump1
`

func TestTextReaderMatching(t *testing.T) {
	t.Parallel()
	lex, err := graphidx.ParseLexicon(strings.NewReader(testLexicon), "lex.tsv")
	if err != nil {
		t.Fatal(err)
	}
	text := "In ZONE 2 the vent 3 motor hums; co2 rises.\n" + // zone2, vent3.motor (longest), co2
		"Pumps and pumping are not a pump.\n" + // pump1 once (word boundary)
		"\n\n" +
		"zone two, zone2x, xzone 2 and subzone 2.\n" + // zone2 only via "zone two"
		"\n" +
		"Nothing known here: CO2x, vent3.\n" + // no match -> Empty
		"\n" +
		"ÜBER-SENSOR near vent 3.\n" // uber (Unicode case fold), vent3
	r := NewTextReader(strings.NewReader(text), "notes.txt", lex)
	got, err := readAll(t, r)
	if err != nil {
		t.Fatal(err)
	}
	want := []string{
		"notes.txt#p1:co2=present,pump1=present,vent3.motor=present,zone2=present",
		"notes.txt#p2:zone2=present",
		"notes.txt#p4:uber=present,vent3=present",
	}
	if !slices.Equal(got, want) {
		t.Errorf("got %q\nwant %q", got, want)
	}
	st := r.Stats()
	if st.Records != 4 || st.OK != 3 || st.Empty != 1 || st.Lines != 9 {
		t.Errorf("stats %+v", st)
	}
	checkReconcile(t, st)

	// A paragraph over the limit is a counted line-too-long at its first line.
	long := "pump\n\n" + strings.Repeat("zone 2 ", 40) + "\nmore\n\npump\n"
	r = NewTextReader(strings.NewReader(long), "long.txt", lex, WithMaxLineBytes(100))
	got, _ = readAll(t, r)
	if st := r.Stats(); len(got) != 2 || st.Skipped[graphidx.ReasonLineTooLong] != 1 || st.FirstBad[graphidx.ReasonLineTooLong].Line != 3 {
		t.Errorf("long paragraph: %q %+v", got, st)
	}
}

func TestOpen(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	write := func(name, s string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(s), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	lex := write("lex.tsv", testLexicon)
	for _, c := range []struct{ path, format, want string }{
		{write("a.jsonl", `{"id":"x","ents":["pump1"]}`+"\n"), "", "x:pump1=present"},
		{write("a.csv", "context,entity,value\nx,pump1,on\n"), "", "x:pump1=on"},
		{write("a.txt", "the pump\n"), "", "PATH#p1:pump1=present"},
		{write("a.data", "context,entity\nx,pump1\n"), "csv", "x:pump1=present"},
	} {
		r, cl, err := Open(c.path, c.format, lex)
		if err != nil {
			t.Fatal(err)
		}
		got, err := readAll(t, r)
		cl.Close()
		if want := strings.ReplaceAll(c.want, "PATH", c.path); err != nil || len(got) != 1 || got[0] != want {
			t.Errorf("%s: %q %v", c.path, got, err)
		}
	}
	if _, _, err := Open(write("b.data", ""), "", ""); !errors.Is(err, ErrUnknownFormat) ||
		!strings.Contains(err.Error(), ".ndjson") || !strings.Contains(err.Error(), "--format") || !strings.Contains(err.Error(), "jsonl, csv or text") {
		t.Errorf("unknown extension: %v, want the known extensions and the --format names", err)
	}
	// Format names are compared without regard to case.
	if r, cl, err := Open(filepath.Join(dir, "a.txt"), "JSONL", ""); err != nil {
		t.Errorf("format JSONL: %v", err)
	} else {
		cl.Close()
		if _, ok := r.(*JSONLReader); !ok {
			t.Errorf("format JSONL opened a %T", r)
		}
	}
	if _, _, err := Open(filepath.Join(dir, "a.txt"), "", ""); !errors.Is(err, ErrLexiconRequired) {
		t.Errorf("no lexicon: %v", err)
	}
}

// TestFormatTable: the format table is the one source of the format names
// and extensions: every extension is detected as its format (also upper
// case and gzipped), no name or extension is listed twice, every entry
// opens a reader, and Open refuses a name outside the table with the
// table's names in the message.
func TestFormatTable(t *testing.T) {
	t.Parallel()
	seen := map[string]string{}
	for _, f := range Formats() {
		if f.Name == "" || f.Name != strings.ToLower(f.Name) || f.Open == nil || f.Help == "" || len(f.Extensions) == 0 {
			t.Errorf("format %+v: incomplete entry", f)
		}
		if g, ok := LookupFormat(f.Name); !ok || g.Name != f.Name {
			t.Errorf("LookupFormat(%q) = %v, %v", f.Name, g.Name, ok)
		}
		for _, ext := range append([]string{f.Name}, f.Extensions...) {
			if prev, dup := seen[ext]; dup {
				t.Errorf("%s listed by %s and %s", ext, prev, f.Name)
			}
			seen[ext] = f.Name
		}
		for _, ext := range f.Extensions {
			for _, p := range []string{"dir/a" + ext, "A" + strings.ToUpper(ext), "a" + ext + ".gz"} {
				if got := DetectFormat(p); got != f.Name {
					t.Errorf("DetectFormat(%q) = %q, want %q", p, got, f.Name)
				}
			}
		}
		var lex *graphidx.Lexicon
		if f.NeedsLexicon {
			var err error
			if lex, err = graphidx.ParseLexicon(strings.NewReader("vent three\tvent3\n"), "lex.tsv"); err != nil {
				t.Fatal(err)
			}
		}
		if r := f.Open(strings.NewReader(""), "empty", lex); r == nil {
			t.Errorf("%s: Open returned nil", f.Name)
		} else if c, ok := r.(io.Closer); ok {
			c.Close()
		}
	}
	if got := FormatNames(); got != "jsonl, csv or text" {
		t.Errorf("FormatNames() = %q", got)
	}
	if _, ok := LookupFormat("parquet"); ok {
		t.Error("LookupFormat found a format outside the table")
	}
	_, _, err := Open(filepath.Join(t.TempDir(), "a.jsonl"), "parquet", "")
	if !errors.Is(err, ErrUnknownFormat) || !strings.Contains(err.Error(), `"parquet" (want jsonl, csv or text)`) {
		t.Errorf("Open with an unknown format: %v", err)
	}
}

// TestJSONLReaderByteOrderMark: a UTF-8 byte-order mark before the first
// line is ignored (RFC 8259 §8.1 allows a parser to ignore it), as the CSV
// reader does. The first context used to be skipped as bad-json with
// "column 1: want a JSON object", which does not say what is wrong. A mark
// on a later line is still a bad line.
func TestJSONLReaderByteOrderMark(t *testing.T) {
	t.Parallel()
	in := "\xef\xbb\xbf" + `{"id":"c1","obs":{"a":"x","b":"y"}}` + "\n" + `{"id":"c2","obs":{"a":"x","b":"z"}}` + "\n" +
		"\xef\xbb\xbf" + `{"id":"c3","obs":{"a":"x"}}` + "\n"
	r := NewJSONLReader(strings.NewReader(in), "bom.jsonl")
	got, err := readAll(t, r)
	if err != nil {
		t.Fatal(err)
	}
	if want := []string{"c1:a=x,b=y", "c2:a=x,b=z"}; !slices.Equal(got, want) {
		t.Errorf("got %q, want %q", got, want)
	}
	if st := r.Stats(); st.OK != 2 || st.Skipped[graphidx.ReasonBadJSON] != 1 || st.FirstBad[graphidx.ReasonBadJSON].Line != 3 {
		t.Errorf("stats %+v", st)
	}
}
