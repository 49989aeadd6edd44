package cli

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestDemoCommand runs `hopwise demo` on a small corpus in a temp dir and
// checks the printed table and the files it names.
func TestDemoCommand(t *testing.T) {
	t.Parallel()
	dir := filepath.Join(t.TempDir(), "out")
	root := NewRoot()
	var out, errb bytes.Buffer
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs([]string{"demo", "--dir", dir, "--seed", "2", "--contexts", "10000"})
	if err := root.ExecuteContext(context.Background()); err != nil {
		t.Fatalf("demo: %v\n%s", err, errb.String())
	}
	s := out.String()
	for _, want := range []string{"far-apart (held-out)", "well-supported", "Explained decisions:", "hopwise route --index " + filepath.Join(dir, "index.hwx"), "hopwise eval"} {
		if !strings.Contains(s, want) {
			t.Errorf("output lacks %q:\n%s", want, s)
		}
	}
	if !strings.Contains(errb.String(), "build: ") {
		t.Errorf("no progress lines on stderr: %q", errb.String())
	}
	for _, f := range []string{"corpus.jsonl", "index.hwx", "decisions.otlp.jsonl", "error-by-route.png"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Error(err)
		}
	}
	// A bad flag value is a clear error, not a panic.
	root = NewRoot()
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs([]string{"demo", "--dir", dir, "--contexts", "3"})
	if err := root.ExecuteContext(context.Background()); err == nil || !strings.Contains(err.Error(), "contexts 3") {
		t.Errorf("--contexts 3: err %v", err)
	}
	root = NewRoot()
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs([]string{"demo", "--dir", dir, "--seed", "0"})
	if err := root.ExecuteContext(context.Background()); err == nil || !strings.Contains(err.Error(), "--seed") {
		t.Errorf("--seed 0: err %v", err)
	}
}
