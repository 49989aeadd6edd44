package corpus

import (
	"bytes"
	"errors"
	"io"
	"os"
	"testing"
	"unicode/utf8"

	"github.com/hopwise/hopwise/graphidx"
)

// checkContexts drains r and checks the reader contract on arbitrary input:
// no panic, no error in lenient mode, every context valid, and the line
// accounting reconciling.
func checkContexts(t *testing.T, r graphidx.ContextReader) graphidx.ReadStats {
	t.Helper()
	var n int64
	for {
		c, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("lenient reader returned %v", err)
		}
		n++
		seen := map[string]bool{}
		if len(c.Obs) == 0 {
			t.Fatalf("context %q without observations", c.ID)
		}
		for _, o := range c.Obs {
			for _, s := range []string{o.Entity, o.Value} {
				if s == "" || len(s) > graphidx.MaxNameBytes || !utf8.ValidString(s) {
					t.Fatalf("context %q: invalid name %q", c.ID, s)
				}
			}
			if seen[o.Entity] {
				t.Fatalf("context %q: entity %q twice", c.ID, o.Entity)
			}
			seen[o.Entity] = true
		}
	}
	st := r.(graphidx.StatsReader).Stats()
	if st.Records != st.OK+st.Empty+st.SkippedTotal() {
		t.Fatalf("records %d != ok %d + empty %d + skipped %v", st.Records, st.OK, st.Empty, st.Skipped)
	}
	if st.Contexts != n {
		t.Fatalf("stats say %d contexts, got %d", st.Contexts, n)
	}
	return st
}

// strictErr checks that a strict reader fails, if at all, with a LineError.
func strictErr(t *testing.T, r graphidx.ContextReader) {
	t.Helper()
	for {
		_, err := r.Next()
		if err == io.EOF {
			return
		}
		if err != nil {
			var le *graphidx.LineError
			if !errors.As(err, &le) || le.Line < 1 || le.Reason == "" {
				t.Fatalf("strict error %v is not a LineError with a line", err)
			}
			return
		}
	}
}

func countLines(data []byte) (lines, blank int64) {
	for len(data) > 0 {
		i := bytes.IndexByte(data, '\n')
		var l []byte
		if i < 0 {
			l, data = data, nil
		} else {
			l, data = data[:i], data[i+1:]
		}
		lines++
		if isBlank(bytes.TrimSuffix(l, []byte{'\r'})) {
			blank++
		}
	}
	return
}

func FuzzJSONLReader(f *testing.F) {
	for _, c := range jsonlCases {
		f.Add([]byte(c.line + "\n"))
	}
	f.Add([]byte("{\"id\":\"a\",\"obs\":{\"x\":\"\\ud800\\udc00\",\"y\":\"\\ud800\"}}\r\n\n{}"))
	f.Add([]byte(`{"id":"a","skip":[[[[{"a":[-0.5e+2]}]]]],"ents":["x"]}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		r := NewJSONLReader(bytes.NewReader(data), "f.jsonl", WithMaxLineBytes(200))
		st := checkContexts(t, r)
		lines, blank := countLines(data)
		// Every line is a record or blank (blank lines over the limit are
		// records too: they are reported as line-too-long).
		if st.Lines != lines || st.Records > lines-blank+st.Skipped[graphidx.ReasonLineTooLong] || st.Records < lines-blank {
			t.Fatalf("lines %d (blank %d) vs stats %+v", lines, blank, st)
		}
		strictErr(t, NewJSONLReader(bytes.NewReader(data), "f.jsonl", graphidx.WithPolicy(graphidx.Strict), WithMaxLineBytes(200)))
		// The builder's transient mode (names as views into the line
		// buffer) must read exactly the same contexts.
		want, _ := readAll(t, NewJSONLReader(bytes.NewReader(data), "f.jsonl", WithMaxLineBytes(200)))
		tr := NewJSONLReader(bytes.NewReader(data), "f.jsonl", WithMaxLineBytes(200))
		tr.SetTransient(true)
		got, _ := readAll(t, tr)
		if len(got) != len(want) {
			t.Fatalf("transient read %d contexts, want %d", len(got), len(want))
		}
		for i := range got {
			if got[i] != want[i] {
				t.Fatalf("transient context %d: %q, want %q", i, got[i], want[i])
			}
		}
	})
}

func FuzzCSVReader(f *testing.F) {
	f.Add([]byte("context,entity,value\nc1,a,1\nc2,b,2\nc1,b,3\n"))
	f.Add([]byte("context,entity\nc1,a\n\"c\"\"2\",\"b\nc\"\nc1,a\n"))
	f.Add([]byte("context,entity,value\nc1,\"a,b\",1,\n,,\n\"x"))
	f.Add([]byte("nope\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		dir := t.TempDir()
		r := NewCSVReader(bytes.NewReader(data), "f.csv", WithMaxLineBytes(200), withReadMemLimit(256), graphidx.WithTempDir(dir))
		defer r.Close()
		var n int64
		for {
			_, err := r.Next()
			if err == io.EOF {
				break
			}
			if err != nil {
				// Only a bad header may stop a lenient CSV reader.
				var le *graphidx.LineError
				if !errors.As(err, &le) || le.Reason != graphidx.ReasonBadHeader {
					t.Fatalf("lenient CSV error %v", err)
				}
				return
			}
			n++
		}
		st := r.Stats()
		if st.Records != st.OK+st.SkippedTotal() || st.Contexts != n {
			t.Fatalf("stats %+v, %d contexts", st, n)
		}
		r.Close()
		if left, _ := os.ReadDir(dir); len(left) != 0 {
			t.Fatalf("temp files left")
		}
		s := NewCSVReader(bytes.NewReader(data), "f.csv", graphidx.WithPolicy(graphidx.Strict), withReadMemLimit(256), graphidx.WithTempDir(dir))
		strictErr(t, s)
		s.Close()
	})
}

func FuzzTextReader(f *testing.F) {
	f.Add([]byte("In Zone 2 the vent 3 motor hums.\n\nCO2 in zone two\n"))
	f.Add([]byte("\xff\xfezone 2\xff\n\r\n\r\npump\tpump_pump pump."))
	f.Add([]byte("ÜBER-SENSOR über-sensor İ zone 2"))
	lex, err := graphidx.ParseLexicon(bytes.NewReader([]byte(testLexicon)), "lex.tsv")
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		r := NewTextReader(bytes.NewReader(data), "f.txt", lex, WithMaxLineBytes(300))
		checkContexts(t, r)
		strictErr(t, NewTextReader(bytes.NewReader(data), "f.txt", lex, graphidx.WithPolicy(graphidx.Strict), WithMaxLineBytes(300)))
		// The lexicon parser must not panic either.
		graphidx.ParseLexicon(bytes.NewReader(data), "f.tsv")
	})
}
