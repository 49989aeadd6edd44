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
	prog := invocation() // the test binary is not the installed hopwise: a "go run" line
	for _, want := range []string{"far-apart (held-out)", "well-supported", "Explained decisions:", prog + " route --index " + filepath.Join(dir, "index.hwx"), prog + " eval"} {
		if !strings.Contains(s, want) {
			t.Errorf("output lacks %q:\n%s", want, s)
		}
	}
	runNextCommands(t, s)
	if e := errb.String(); !strings.Contains(e, "build: read  10k contexts") || !strings.Contains(e, "measured ") {
		t.Errorf("progress and stage lines not on stderr: %q", e)
	}
	if strings.Contains(s, "build: ") || strings.Contains(s, "measured ") {
		t.Errorf("progress on stdout:\n%s", s)
	}
	for _, f := range []string{"corpus.jsonl", "index.hwx", "decisions.otlp.jsonl", "error-by-route.png"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Error(err)
		}
	}
	// --quiet prints what its help says: the table, the files and the
	// timings, nothing on stderr.
	root = NewRoot()
	out.Reset()
	errb.Reset()
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs([]string{"demo", "--dir", filepath.Join(t.TempDir(), "q"), "--contexts", "2000", "--quiet"})
	if err := root.ExecuteContext(context.Background()); err != nil {
		t.Fatalf("demo --quiet: %v\n%s", err, errb.String())
	}
	if q := out.String(); !strings.Contains(q, "far-apart (held-out)") || !strings.Contains(q, "Wrote:") || !strings.Contains(q, "Timings:") ||
		strings.Contains(q, "Explained decisions:") || strings.Contains(q, "Next:") || errb.Len() > 0 {
		t.Errorf("demo --quiet: stdout\n%s\nstderr %q", q, errb.String())
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

// runNextCommands runs every command of the demo's "Next:" list through the
// command line, as a reader who only ran the demo with "go run" would paste
// it (the test binary is not the installed hopwise, so each line starts
// with the "go run" form of invocation). tune and ab read the demo's
// experiment traces, so they must find propensities and outcomes there.
// "eval" builds its own worlds and is skipped under -short.
func runNextCommands(t *testing.T, out string) {
	t.Helper()
	_, next, ok := strings.Cut(out, "\nNext:\n")
	if !ok {
		t.Fatalf("no Next: list in\n%s", out)
	}
	prog := invocation() + " "
	n := 0
	for _, line := range strings.Split(strings.TrimRight(next, "\n"), "\n") {
		line = strings.TrimSpace(line)
		args, ok := strings.CutPrefix(line, prog)
		if !ok {
			t.Errorf("Next line %q does not start with %q", line, prog)
			continue
		}
		n++
		fields := shellWords(t, args)
		if fields[0] == "eval" && testing.Short() {
			continue
		}
		root := NewRoot()
		var o, e bytes.Buffer
		root.SetOut(&o)
		root.SetErr(&e)
		root.SetArgs(fields)
		if err := root.ExecuteContext(context.Background()); err != nil {
			t.Errorf("%s: %v\n%s", line, err, e.String())
		}
	}
	for _, sub := range []string{"inspect", "route", "tune", "ab", "eval"} {
		if !strings.Contains(next, prog+sub+" ") && !strings.HasSuffix(strings.TrimSpace(next), prog+sub) {
			t.Errorf("no %q line in Next:\n%s", sub, next)
		}
	}
	if n < 6 {
		t.Errorf("%d Next commands, want at least 6:\n%s", n, next)
	}
}

// shellWords splits a command line the way a POSIX shell splits the words
// the demo prints: blanks separate words, and single quotes (an embedded
// quote is written as quote, backslash, quote, quote) keep blanks inside one word.
func shellWords(t *testing.T, line string) []string {
	t.Helper()
	var words []string
	var w strings.Builder
	inWord, quoted := false, false
	for i := 0; i < len(line); i++ {
		c := line[i]
		switch {
		case quoted && c == '\'':
			quoted = false
		case quoted:
			w.WriteByte(c)
		case c == '\'':
			quoted, inWord = true, true
		case c == '\\' && i+1 < len(line):
			i++
			w.WriteByte(line[i])
			inWord = true
		case c == ' ' || c == '\t':
			if inWord {
				words = append(words, w.String())
				w.Reset()
				inWord = false
			}
		default:
			w.WriteByte(c)
			inWord = true
		}
	}
	if quoted {
		t.Fatalf("unterminated quote in %q", line)
	}
	if inWord {
		words = append(words, w.String())
	}
	return words
}

// TestGoRunInvocation: the demo's "Next:" lines run hopwise as "go run
// ./cmd/hopwise" only inside a checkout; elsewhere (a binary run with
// "go run <module>/cmd/hopwise@version" from any directory) they name the
// module command at the running version, @latest for a development build.
func TestGoRunInvocation(t *testing.T) {
	t.Parallel()
	elsewhere := t.TempDir()
	checkout := t.TempDir()
	if err := os.MkdirAll(filepath.Join(checkout, "cmd", "hopwise"), 0o755); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		dir, version, want string
	}{
		{checkout, "(devel)", "go run ./cmd/hopwise"},
		{checkout, "v1.2.0", "go run ./cmd/hopwise"},
		{elsewhere, "", "go run github.com/hopwise/hopwise/cmd/hopwise@latest"},
		{elsewhere, "(devel)", "go run github.com/hopwise/hopwise/cmd/hopwise@latest"},
		{elsewhere, "v1.2.0", "go run github.com/hopwise/hopwise/cmd/hopwise@v1.2.0"},
	} {
		if got := goRunInvocation(tc.dir, tc.version); got != tc.want {
			t.Errorf("goRunInvocation(%s, %q) = %q, want %q", filepath.Base(tc.dir), tc.version, got, tc.want)
		}
	}
}
