package cli

import (
	"errors"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

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
		_, err := routeCLI(t, c.args...)
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
	_, err := routeCLI(t, "eval", "--workers", "-2")
	if err == nil || !strings.Contains(err.Error(), "--workers must not be negative") {
		t.Errorf("eval --workers -2: %v", err)
	}
}

// TestErrorsSayWhatToDo checks the hints of route and inspect errors: near
// names for an unknown entity, the values for an unknown value, an
// explained deadline, the listing of names, and one exit status (2) for a
// damaged index from both commands.
func TestErrorsSayWhatToDo(t *testing.T) {
	t.Parallel()
	idx := writeRouteIndex(t)
	for _, c := range []struct {
		args []string
		want []string
	}{
		{[]string{"route", "--index", idx, "--from", "vent-north", "--value", "open", "--to", "humidity-zone"},
			[]string{`unknown entity: "humidity-zone"`, `did you mean "humidity-zone1"`, "--list --prefix humidity"}},
		{[]string{"route", "--index", idx, "--from", "Vent-North", "--value", "open", "--to", "humidity-zone1"},
			[]string{`did you mean "vent-north"`}},
		{[]string{"route", "--index", idx, "--from", "vent-north", "--value", "ajar", "--to", "humidity-zone1"},
			[]string{`unknown value: "ajar"`, `has the values "closed" or "open"`}},
		{[]string{"route", "--index", idx, "--from", "vent-north", "--value", "open", "--to", "humidity-zone1", "--timeout", "1ns"},
			[]string{"--timeout of 1ns expired", "Raise --timeout"}},
		{[]string{"inspect", "--index", idx, "--entity", "vent-nort"},
			[]string{`did you mean "vent-north"`}},
		{[]string{"inspect", "--index", idx, "--entity", "x", "--list"}, []string{"not both"}},
	} {
		_, err := routeCLI(t, c.args...)
		if err == nil {
			t.Errorf("%v: no error", c.args)
			continue
		}
		for _, w := range c.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%v: error %q lacks %q", c.args, err, w)
			}
		}
	}
	out, err := routeCLI(t, "inspect", "--index", idx, "--prefix", "humidity")
	if err != nil || out != "humidity-zone1\n" {
		t.Errorf("inspect --prefix humidity: %q, %v", out, err)
	}
	out, err = routeCLI(t, "inspect", "--index", idx, "--list", "--prefix", "nothing", "--json")
	if err != nil || !strings.Contains(out, `"count": 0`) {
		t.Errorf("inspect --list --prefix nothing --json: %q, %v", out, err)
	}

	// The same damage gets the same exit status from route and inspect.
	raw, err := os.ReadFile(idx)
	if err != nil {
		t.Fatal(err)
	}
	bad := filepath.Join(t.TempDir(), "truncated.hwx")
	if err := os.WriteFile(bad, raw[:len(raw)/2], 0o644); err != nil {
		t.Fatal(err)
	}
	for _, args := range [][]string{
		{"route", "--index", bad, "--from", "vent-north", "--value", "open", "--to", "humidity-zone1"},
		{"inspect", "--index", bad},
	} {
		_, err := routeCLI(t, args...)
		var ee *ExitError
		if !errors.As(err, &ee) || ee.Code != 2 {
			t.Errorf("%s on a truncated index: %v, want exit status 2", args[0], err)
		}
	}
}

// TestRouteRefusesNegativeTimeout: --timeout below zero is an error naming
// the flag; it used to be taken silently as "no deadline", the meaning of
// 0, so a typo removed the deadline a gateway test meant to set.
func TestRouteRefusesNegativeTimeout(t *testing.T) {
	t.Parallel()
	_, err := routeCLI(t, "route", "--index", "x.hwx", "--from", "a", "--value", "v", "--to", "b", "--timeout", "-1s")
	if err == nil || !strings.Contains(err.Error(), "route: --timeout must not be negative, got -1s (0 means no deadline)") {
		t.Errorf("--timeout -1s: %v", err)
	}
}

// TestUnknownValueListedOnce: a single query with an unknown value lists
// the entity's values once; it listed them twice ("it has values "closed",
// "open"; "vent-north" has the values "closed" or "open"").
func TestUnknownValueListedOnce(t *testing.T) {
	t.Parallel()
	idx := writeRouteIndex(t)
	_, err := routeCLI(t, "route", "--index", idx, "--from", "vent-north", "--value", "ajar", "--to", "humidity-zone1")
	if err == nil || strings.Count(err.Error(), `"closed"`) != 1 || !strings.Contains(err.Error(), `"vent-north" has the values "closed" or "open"`) {
		t.Errorf("error %v, want the values listed once", err)
	}
}
