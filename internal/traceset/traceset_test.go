package traceset

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// spans writes n decision spans (keys bed-0..) and, with outcomes, their
// outcome spans with score 1.
func spans(t *testing.T, path string, n int, outcomes bool) {
	t.Helper()
	var b strings.Builder
	for i := range n {
		fmt.Fprintf(&b, `{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"%032x","spanId":"%016x","name":"hopwise.decide","attributes":[`+
			`{"key":"hopwise.query.key","value":{"stringValue":"bed-%d"}},{"key":"hopwise.route.mode","value":{"stringValue":"direct"}}]}`, i+1, i+1, i)
		if outcomes {
			fmt.Fprintf(&b, `,{"traceId":"%032x","spanId":"%016x","name":"hopwise.outcome","attributes":[`+
				`{"key":"hopwise.query.key","value":{"stringValue":"bed-%d"}},{"key":"hopwise.outcome.score","value":{"doubleValue":1}}]}`, i+1, i+1000, i)
		}
		b.WriteString("]}]}]}\n")
	}
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
}

func TestLoad(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	withOut, bare, outs := filepath.Join(dir, "a.jsonl"), filepath.Join(dir, "b.jsonl"), filepath.Join(dir, "o.jsonl")
	spans(t, withOut, 4, true)
	spans(t, bare, 4, false)
	if err := os.WriteFile(outs, []byte(`{"unit":"bed-1","score":0.5,"input_tokens":10}`+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := Load([]string{withOut, withOut}, "")
	if err != nil {
		t.Fatal(err)
	}
	if s.Join.Joined != 4 || s.Stats.DuplicateSpans != 8 || s.OutcomeSource != "trace outcome spans" {
		t.Errorf("spans: joined %d, duplicates %d, source %q", s.Join.Joined, s.Stats.DuplicateSpans, s.OutcomeSource)
	}
	s, err = Load([]string{withOut}, outs)
	if err != nil {
		t.Fatal(err)
	}
	if s.Join.Joined != 1 || s.Ignored != 4 || s.Join.DecisionsWithoutOutcome != 3 || Cost(s.Joined[0].Outcome, 0.5) != 5 {
		t.Errorf("outcomes file: %+v, ignored %d", s.Join, s.Ignored)
	}
	if _, err := Load(nil, ""); !errors.Is(err, ErrNoTraces) {
		t.Errorf("no files: %v", err)
	}
	if _, err := Load([]string{bare}, ""); !errors.Is(err, ErrNothingJoined) {
		t.Errorf("no outcomes: %v", err)
	}
}
