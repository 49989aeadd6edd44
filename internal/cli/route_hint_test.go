package cli

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// batchErrors runs route --queries on lines with args and returns each
// output line's error ("" for a decision).
func batchErrors(t *testing.T, lines []string, args ...string) []string {
	t.Helper()
	qs := filepath.Join(t.TempDir(), "q.jsonl")
	if err := os.WriteFile(qs, []byte(strings.Join(lines, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	out, _ := routeCLI(t, append([]string{"route", "--index", writeRouteIndex(t), "--queries", qs}, args...)...)
	got := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	if len(got) != len(lines) {
		t.Fatalf("%d output lines for %d input lines:\n%s", len(got), len(lines), out)
	}
	errs := make([]string, len(got))
	for i, l := range got {
		var m struct{ Error string }
		if err := json.Unmarshal([]byte(l), &m); err != nil {
			t.Fatalf("line %d not JSON: %s", i+1, l)
		}
		errs[i] = m.Error
	}
	return errs
}

// TestRouteBatchHints: batch error lines carry the hints of a single
// query: near names for the first 8 unknown entities (in input
// order, whatever --workers), then the way to list names; the values of an
// entity given an unknown value.
func TestRouteBatchHints(t *testing.T) {
	t.Parallel()
	var lines []string
	for i := range 8 + 3 {
		lines = append(lines, fmt.Sprintf(`{"id":"u%d","from":"vent-nort","value":"open","to":"bed-tomato"}`, i))
		lines = append(lines, fmt.Sprintf(`{"id":"k%d","from":"vent-north","value":"open","to":"bed-tomato"}`, i))
	}
	lines = append(lines, `{"id":"v","from":"vent-north","value":"ajar","to":"bed-tomato"}`)
	for _, workers := range []string{"1", "3"} {
		errs := batchErrors(t, lines, "--workers", workers)
		for i, e := range errs[:len(errs)-1] {
			switch {
			case i%2 == 1:
				if e != "" {
					t.Errorf("workers %s, line %d: %s", workers, i+1, e)
				}
			case i/2 < 8:
				if !strings.Contains(e, `did you mean "vent-north"?`) {
					t.Errorf("workers %s, line %d: no near names in %q", workers, i+1, e)
				}
			default:
				if strings.Contains(e, "did you mean") || !strings.Contains(e, fmt.Sprintf("first %d unknown names", 8)) || !strings.Contains(e, "--list --prefix") {
					t.Errorf("workers %s, line %d: want the listing advice past the bound, got %q", workers, i+1, e)
				}
			}
		}
		if e := errs[len(errs)-1]; !strings.Contains(e, `"vent-north" has the values "closed" or "open"`) {
			t.Errorf("workers %s: unknown value: %q", workers, e)
		}
	}
}

// TestRouteBatchDeadline: a batch line whose deadline expires before the
// direct estimate says what that means, as a single query does.
func TestRouteBatchDeadline(t *testing.T) {
	t.Parallel()
	errs := batchErrors(t, []string{`{"id":"q","from":"vent-north","value":"open","to":"bed-tomato"}`}, "--timeout", "1ns")
	for _, want := range []string{"line 1: ", "context deadline exceeded", "--timeout of 1ns expired", "marked truncated (cut: deadline)", "Raise --timeout"} {
		if !strings.Contains(errs[0], want) {
			t.Errorf("error %q lacks %q", errs[0], want)
		}
	}
}
