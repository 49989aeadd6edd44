package cli

import (
	"bytes"
	"context"
	"runtime"
	"strings"
	"testing"
)

// runArgs runs the command line with args and returns its error and output.
func runArgs(t *testing.T, args ...string) (string, error) {
	t.Helper()
	root := NewRoot()
	var out bytes.Buffer
	root.SetOut(&out)
	root.SetErr(&out)
	root.SetArgs(args)
	err := root.ExecuteContext(context.Background())
	return out.String(), err
}

// TestRenamedFlagsNameTheNewFlag checks that a renamed flag is refused with
// an error naming its new name, and that other unknown flags keep cobra's
// message.
func TestRenamedFlagsNameTheNewFlag(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"route", "--index", "x.hwx", "--budget", "5"}, "route: flag --budget was renamed to --expansion-budget"},
		{[]string{"route", "--index", "x.hwx", "--budget=5"}, "route: flag --budget was renamed to --expansion-budget"},
		{[]string{"route", "--index", "x.hwx", "--fallback", "direct"}, "route: flag --fallback was renamed to --unknown-entity"},
		{[]string{"bench", "--budget", "5"}, "bench: flag --budget was renamed to --expansion-budget"},
		{[]string{"route", "--index", "x.hwx", "--bogus"}, "unknown flag: --bogus"},
		// A command without the new flag keeps the plain message.
		{[]string{"inspect", "--index", "x.hwx", "--budget", "5"}, "unknown flag: --budget"},
	} {
		_, err := runArgs(t, c.args...)
		if err == nil || err.Error() != c.want {
			t.Errorf("%v: error %v, want %q", c.args, err, c.want)
		}
	}
}

func TestResolveWorkers(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		in, want int
		err      bool
	}{{0, runtime.GOMAXPROCS(0), false}, {1, 1, false}, {7, 7, false}, {-1, 0, true}} {
		got, err := resolveWorkers(c.in)
		if (err != nil) != c.err || got != c.want {
			t.Errorf("resolveWorkers(%d) = %d, %v", c.in, got, err)
		}
	}
	// Every command with --workers gives it the same default and refuses
	// a negative value the same way.
	for _, cmd := range []string{"build", "eval", "route"} {
		c, _, err := NewRoot().Find([]string{cmd})
		if err != nil {
			t.Fatal(err)
		}
		f := c.Flags().Lookup("workers")
		if f == nil || f.DefValue != "0" || !strings.Contains(f.Usage, "(0: one per core)") {
			t.Errorf("%s --workers: %+v", cmd, f)
		}
	}
	_, err := runArgs(t, "eval", "--workers", "-2")
	if err == nil || !strings.Contains(err.Error(), "--workers must not be negative") {
		t.Errorf("eval --workers -2: %v", err)
	}
}
