package otelx

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// outcomeSpanLine is one OTLP/JSON line holding one outcome span with the
// given extra attributes.
func outcomeSpanLine(traceID, spanID, attrs string) string {
	return `{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"` + traceID + `","spanId":"` + spanID + `","name":"hopwise.outcome",` +
		`"attributes":[{"key":"hopwise.query.key","value":{"stringValue":"bed-3"}},{"key":"hopwise.outcome.score","value":{"doubleValue":1}}` + attrs + `]}]}]}]}`
}

// decisionSpanLine is one OTLP/JSON line holding one direct decision span.
func decisionSpanLine(traceID, spanID, key string) string {
	return `{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"` + traceID + `","spanId":"` + spanID + `","name":"hopwise.decide",` +
		`"attributes":[{"key":"hopwise.query.key","value":{"stringValue":"` + key + `"}},{"key":"hopwise.route.mode","value":{"stringValue":"direct"}}]}]}]}]}`
}

// TestOutcomeFieldRanges: token counts whose sum overflows int64, and
// every other numeric outcome field out of its range, are rejected with
// the file, line and field, in plain outcome files and in outcome spans.
func TestOutcomeFieldRanges(t *testing.T) {
	t.Parallel()
	plain := []struct{ line, want string }{
		{`{"unit":"u","score":1,"input_tokens":9000000000000000000,"output_tokens":9000000000000000000}`, "out.jsonl:1: field input_tokens: 9000000000000000000 above"},
		{`{"unit":"u","score":1,"output_tokens":9000000000000000000}`, "out.jsonl:1: field output_tokens: 9000000000000000000 above"},
		{`{"unit":"u","score":1,"latency_ms":1e300}`, "out.jsonl:1: field latency_ms: 1e+300 above"},
		{`{"unit":"u","score":1,"input_tokens":1e3}`, "field input_tokens"},
	}
	for _, c := range plain {
		_, err := ReadOutcomes(strings.NewReader(c.line), "out.jsonl")
		if !errors.Is(err, ErrBadRecord) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err = %v, want %q", c.line, err, c.want)
		}
	}
	const tid, sid = "0af7651916cd43dd8448eb211c80319c", "b7ad6b7169203331"
	spans := []struct{ attrs, want string }{
		{`,{"key":"hopwise.outcome.input_tokens","value":{"intValue":"9000000000000000000"}},{"key":"hopwise.outcome.output_tokens","value":{"intValue":"9000000000000000000"}}`,
			"t.jsonl:1: span " + sid + ": attribute hopwise.outcome.input_tokens: 9000000000000000000 above"},
		{`,{"key":"hopwise.outcome.output_tokens","value":{"intValue":"-4"}}`, "attribute hopwise.outcome.output_tokens: negative"},
		{`,{"key":"hopwise.outcome.latency_ms","value":{"doubleValue":-1}}`, "attribute hopwise.outcome.latency_ms: -1 is not"},
		{`,{"key":"hopwise.outcome.latency_ms","value":{"doubleValue":"Infinity"}}`, "attribute hopwise.outcome.latency_ms: +Inf is not"},
	}
	for _, c := range spans {
		_, err := ReadTraces(strings.NewReader(outcomeSpanLine(tid, sid, c.attrs)), "t.jsonl", nil, nil)
		if !errors.Is(err, ErrBadRecord) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err = %v, want %q", c.attrs, err, c.want)
		}
	}
	// The largest accepted counts still add up without overflow.
	o, err := ReadOutcomes(strings.NewReader(fmt.Sprintf(`{"unit":"u","score":1,"input_tokens":%d,"output_tokens":%d}`, int64(1)<<40, int64(1)<<40)), "out.jsonl")
	if err != nil || o[0].Tokens() != 2<<40 {
		t.Errorf("largest counts: %v %v", o, err)
	}
}

// TestDuplicateSpansDropped: a file read twice (or a line repeated) yields
// each (trace id, span id) once, and the reader says how many it dropped.
func TestDuplicateSpansDropped(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	var b strings.Builder
	for i := range 5 {
		fmt.Fprintln(&b, decisionSpanLine(fmt.Sprintf("%032x", i+1), fmt.Sprintf("%016x", i+1), fmt.Sprintf("bed-%d", i)))
		fmt.Fprintln(&b, outcomeSpanLine(fmt.Sprintf("%032x", i+1), fmt.Sprintf("%016x", i+100), ""))
	}
	one := filepath.Join(dir, "t.jsonl")
	if err := os.WriteFile(one, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitAfter(b.String(), "\n")
	twice := filepath.Join(dir, "d.jsonl")
	if err := os.WriteFile(twice, []byte(b.String()+lines[0]), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		paths []string
		dups  int
	}{{[]string{one}, 0}, {[]string{one, one}, 10}, {[]string{twice}, 1}} {
		lg, err := ReadTraceFiles(c.paths...)
		if err != nil {
			t.Fatal(err)
		}
		if len(lg.Decisions) != 5 || len(lg.Outcomes) != 5 || lg.Stats.DuplicateSpans != c.dups || lg.Stats.Decisions != 5 {
			t.Errorf("%v: %d decisions, %d outcomes, stats %+v; want 5, 5 and %d duplicates", c.paths, len(lg.Decisions), len(lg.Outcomes), lg.Stats, c.dups)
		}
	}
}

// TestMissingSpanIDsRejected: a decision or outcome span without a trace
// or span id (absent, or all zero) cannot be told apart from a duplicate
// and is rejected with the file and line.
func TestMissingSpanIDsRejected(t *testing.T) {
	t.Parallel()
	const tid, sid = "0af7651916cd43dd8448eb211c80319c", "b7ad6b7169203331"
	for _, c := range []struct{ line, want string }{
		{decisionSpanLine("", sid, "u"), "t.jsonl:1: span " + sid + ": trace id: missing or all zero"},
		{decisionSpanLine("00000000000000000000000000000000", sid, "u"), "t.jsonl:1: span " + sid + ": trace id: missing or all zero"},
		{decisionSpanLine(tid, "0000000000000000", "u"), "t.jsonl:1: span 0000000000000000: span id: missing or all zero"},
		{outcomeSpanLine(tid, "", ""), "t.jsonl:1: span : span id: missing or all zero"},
	} {
		_, err := ReadTraces(strings.NewReader(c.line), "t.jsonl", nil, nil)
		if !errors.Is(err, ErrBadRecord) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err = %v, want %q", c.line, err, c.want)
		}
	}
}
