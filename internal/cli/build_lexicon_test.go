package cli

import (
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// TestBuildTextLexicon: a text corpus with a valued lexicon builds a valued
// index; the summary prints the lexicon's collisions, the valued entity left
// out for lack of a value and the conflicting paragraph, and the builder's
// budget is the budget minus the lexicon's memory.
func TestBuildTextLexicon(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	write := func(name, s string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(s), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	lex := write("lex.tsv", "moisture probe\tbed-11/moisture-probe\n"+
		"probe reads wet\tbed-11/moisture-probe\treads-wet\n"+
		"probe reads dry\tbed-11/moisture-probe\treads-dry\n"+
		"leaves droop\tbed-10/leaf-wilt\twilted\n"+
		"leaves firm\tbed-10/leaf-wilt\tfirm\n"+
		"Leaves Firm\tbed-10/other\n")
	notes := write("notes.txt", "The probe reads wet and the leaves droop.\n\n"+
		"probe reads dry, leaves firm.\n\n"+
		"The moisture probe is near; leaves droop.\n\n"+
		"probe reads wet then\nprobe reads dry.\n")
	out := filepath.Join(dir, "n.idx")
	got, err := runCLI(t, "build", "--corpus", notes, "--lexicon", lex, "--out", out, "--quiet", "--mem-budget", "64MiB")
	if err != nil {
		t.Fatalf("%v\n%s", err, got)
	}
	l, err := graphidx.LoadLexicon(lex)
	if err != nil {
		t.Fatal(err)
	}
	mem := l.Stats().MemBytes
	for _, want := range []string{
		"lexicon       5 forms (4 with a value), 2 entities, 1 colliding forms (first listed kept)",
		`lex.tsv:6: surface: duplicate-surface: "Leaves Firm" names "bed-10/other" here`,
		"1 times a valued entity was named without a value",
		"records       4 read, 3 ok, 1 skipped",
		"notes.txt:8: conflicting-values",
		"budget " + strconv.FormatInt(64<<20-mem, 10) + " bytes",
	} {
		if !strings.Contains(got, want) {
			t.Errorf("summary lacks %q:\n%s", want, got)
		}
	}
	x, err := graphidx.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	id, ok := x.Lookup("bed-11/moisture-probe")
	if vals := x.Values(id); !ok || !slices.Equal(vals, []string{"reads-dry", "reads-wet"}) {
		t.Errorf("probe values %q, want the lexicon's values and no %q", vals, graphidx.PresentValue)
	}

	// A lexicon over the budget alone is a bad-input error.
	_, err = runCLI(t, "build", "--corpus", notes, "--lexicon", lex, "--out", out, "--quiet", "--mem-budget", "1KiB")
	var ee *ExitError
	if !errors.As(err, &ee) || ee.Code != 2 || !strings.Contains(err.Error(), "--mem-budget 1024 bytes") {
		t.Errorf("lexicon over budget: %v", err)
	}
	// No lexicon: the error names the flag.
	if _, err = runCLI(t, "build", "--corpus", notes, "--out", out, "--quiet"); err == nil || !strings.Contains(err.Error(), "--lexicon") {
		t.Errorf("no lexicon: %v", err)
	}
}
