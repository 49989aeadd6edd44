package cli

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestBuildRefusesBadBudgets: a negative --max-neighbors and a --mem-budget
// that leaves the builder less than graphidx.MinMemBudget (a CSV corpus
// gives half to the reader) exit 2 naming the flag, where the library used
// to raise or ignore the value silently; so do more counting goroutines
// than graphidx.MaxWorkers or than the budget holds.
func TestBuildRefusesBadBudgets(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	csv := filepath.Join(dir, "bed.csv")
	if err := os.WriteFile(csv, []byte("context,entity,value\nc1,vent,open\nc1,pump,on\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"build", "--corpus", csv, "--out", filepath.Join(dir, "a.idx"), "--mem-budget", "1MiB"}, "leaves 524288 bytes for the builder"},
		{[]string{"build", "--corpus", csv, "--out", filepath.Join(dir, "b.idx"), "--max-neighbors", "-2"}, "--max-neighbors must not be negative"},
		// Every counting goroutine reads every context: 100 000 of them
		// ran for over ten minutes at 3.8 GB on a 100 000-context corpus.
		{[]string{"build", "--corpus", csv, "--out", filepath.Join(dir, "c.idx"), "--workers", "100000"}, "--workers must be at most 256"},
		{[]string{"build", "--corpus", csv, "--out", dir}, "--out: graphidx: output " + dir + " is a directory"},
		{[]string{"build", "--corpus", csv, "--out", filepath.Join(dir, "d.idx"), "--workers", "200", "--mem-budget", "8MiB"},
			"--workers 200 does not fit --mem-budget 8MiB: the builder's 4194304 bytes (after the corpus reader's half) hold at most 32"},
	} {
		_, err := runCLI(t, tc.args...)
		var ee *ExitError
		if !errors.As(err, &ee) || ee.Code != 2 || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%v: got %v, want exit 2 with %q", tc.args, err, tc.want)
		}
	}
	if _, err := runCLI(t, "build", "--corpus", csv, "--out", filepath.Join(dir, "ok.idx"), "--mem-budget", "2MiB"); err != nil {
		t.Errorf("--mem-budget 2MiB on a CSV corpus: %v", err)
	}
}
