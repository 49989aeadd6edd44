package cli

import (
	"bytes"
	"context"
	"encoding/json"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/internal/bench"
)

func runBenchCmd(t *testing.T, args ...string) (string, string, error) {
	t.Helper()
	root := NewRoot()
	var out, errb bytes.Buffer
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs(append([]string{"bench"}, args...))
	err := root.ExecuteContext(context.Background())
	return out.String(), errb.String(), err
}

func TestBenchJSON(t *testing.T) {
	if testing.Short() {
		t.Skip("runs every bench phase (several seconds)")
	}
	out, progress, err := runBenchCmd(t, "--entities", "1500", "--avg-degree", "4", "--queries", "60",
		"--agree-queries", "30", "--hub", "--hub-queries", "30", "--seed", "7", "--open", "read", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var rep bench.Report
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatalf("not JSON: %v\n%s", err, out)
	}
	if rep.Graph.Entities != 1500 || rep.Graph.Seed != 7 || rep.Graph.Open != "read" || rep.Uncached.Latency.N != 60 || rep.Hub == nil || rep.Gonum == nil {
		t.Errorf("report %+v", rep)
	}
	if !strings.Contains(progress, "bench ") || strings.Contains(out, "bench ") {
		t.Errorf("progress must go to stderr only; stderr %q", progress)
	}
}

// TestBenchOpenShared: --open shared opens the mapped index without the
// private copy of its per-entity sections and says so in the report.
func TestBenchOpenShared(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and queries an index")
	}
	out, _, err := runBenchCmd(t, "--entities", "1500", "--avg-degree", "4", "--queries", "20",
		"--agree-queries", "10", "--baselines", "off", "--seed", "7", "--open", "shared", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var rep bench.Report
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatalf("not JSON: %v\n%s", err, out)
	}
	if rep.Graph.Open != "shared" || rep.Uncached.Latency.N != 20 {
		t.Errorf("open %q, %d uncached decisions; want shared, 20", rep.Graph.Open, rep.Uncached.Latency.N)
	}
}

func TestBenchBadFlags(t *testing.T) {
	t.Parallel()
	for _, args := range [][]string{
		{"--baselines", "sometimes"},
		{"--build", "fast"},
		{"--open", "disk"},
		{"--queries", "0"},
		{"--entities", "1"},
		{"--beam", "0"},
	} {
		if _, _, err := runBenchCmd(t, args...); err == nil {
			t.Errorf("%v: no error", args)
		}
	}
}
