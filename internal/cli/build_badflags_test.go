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
// to raise or ignore the value silently.
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
