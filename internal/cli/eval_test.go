package cli

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// evalCLI runs the root command with separate stdout and stderr.
func evalCLI(t *testing.T, args ...string) (stdout, stderr string, err error) {
	t.Helper()
	root := NewRoot()
	var out, errb bytes.Buffer
	root.SetOut(&out)
	root.SetErr(&errb)
	root.SetArgs(args)
	err = root.ExecuteContext(context.Background())
	return out.String(), errb.String(), err
}

// TestEvalRouteAgree measures the router through `hopwise route --queries`
// on a world written by the eval generator (the routed-quality check) and checks
// that the routed MSE computed from the route command's JSONL equals the one
// `hopwise eval` reports for the same world.
func TestEvalRouteAgree(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	small := []string{"--vars", "30", "--edges", "30", "--held-out", "8", "--contexts", "5000", "--seed", "3"}
	out, _, err := evalCLI(t, append([]string{"eval", "--json", "--write-queries", dir}, small...)...)
	if err != nil {
		t.Fatalf("eval: %v", err)
	}
	var sum struct {
		Worlds []struct {
			HeldOut struct {
				Routed, Direct float64
				N              int
			} `json:"heldout"`
			Supported struct {
				Routed, Direct float64
				N              int
			} `json:"supported"`
		} `json:"worlds"`
	}
	if err := json.Unmarshal([]byte(out), &sum); err != nil || len(sum.Worlds) != 1 {
		t.Fatalf("eval JSON (%v): %.300s", err, out)
	}
	for _, f := range []string{"corpus.jsonl", "index.hwx", "queries.jsonl", "truth.jsonl"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Fatalf("--write-queries: %v", err)
		}
	}

	rout, _, err := evalCLI(t, "route", "--index", filepath.Join(dir, "index.hwx"), "--queries", filepath.Join(dir, "queries.jsonl"))
	if err != nil {
		// Exit status 2 only means some queries failed (an observed value
		// absent from the corpus); eval skips those too.
		var ee *ExitError
		if !asExit(err, &ee) || ee.Code != 2 {
			t.Fatalf("route: %v", err)
		}
	}
	truth := map[string]struct {
		set string
		p   map[string]float64
	}{}
	tf, err := os.ReadFile(filepath.Join(dir, "truth.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	for _, line := range strings.Split(strings.TrimSpace(string(tf)), "\n") {
		var tl struct {
			ID    string             `json:"id"`
			Set   string             `json:"set"`
			Truth map[string]float64 `json:"truth"`
		}
		if err := json.Unmarshal([]byte(line), &tl); err != nil {
			t.Fatal(err)
		}
		truth[tl.ID] = struct {
			set string
			p   map[string]float64
		}{tl.Set, tl.Truth}
	}
	sums := map[string]float64{}
	counts := map[string]int{}
	sc := bufio.NewScanner(strings.NewReader(rout))
	for sc.Scan() {
		var l struct {
			ID       string             `json:"id"`
			Estimate map[string]float64 `json:"estimate"`
			Error    string             `json:"error"`
		}
		if err := json.Unmarshal(sc.Bytes(), &l); err != nil {
			t.Fatalf("route line %q: %v", sc.Text(), err)
		}
		if l.Error != "" {
			continue
		}
		tr, ok := truth[l.ID]
		if !ok {
			t.Fatalf("route answered unknown id %q", l.ID)
		}
		se := 0.0
		for v, p := range tr.p {
			d := l.Estimate[v] - p
			se += d * d
		}
		sums[tr.set] += se / float64(len(tr.p))
		counts[tr.set]++
	}
	w := sum.Worlds[0]
	for _, c := range []struct {
		set  string
		want float64
		n    int
	}{{"heldout", w.HeldOut.Routed, w.HeldOut.N}, {"supported", w.Supported.Routed, w.Supported.N}} {
		if counts[c.set] != c.n {
			t.Errorf("%s: route answered %d queries, eval scored %d", c.set, counts[c.set], c.n)
			continue
		}
		got := sums[c.set] / float64(counts[c.set])
		if math.Abs(got-c.want) > 1e-9*math.Max(1, c.want) {
			t.Errorf("%s: routed MSE via route --queries %.10g, eval %.10g", c.set, got, c.want)
		}
	}
	if !(w.HeldOut.Routed < w.HeldOut.Direct) {
		t.Errorf("held-out routed MSE %.4f not below direct %.4f", w.HeldOut.Routed, w.HeldOut.Direct)
	}
}

func TestEvalFlagErrors(t *testing.T) {
	t.Parallel()
	for _, args := range [][]string{
		{"eval", "--condition", "sideways"},
		{"eval", "--seeds", "1,x"},
		{"eval", "--seeds", "1,1"},
		{"eval", "--worlds", "0"},
		{"eval", "--fit", "--seeds", "1,2", "--fit-seeds", "2,3"},
		{"eval", "--max-bridges", "4"},
	} {
		if _, _, err := evalCLI(t, args...); err == nil {
			t.Errorf("%v: no error", args)
		}
	}
}

func TestEvalTableAndPlot(t *testing.T) {
	t.Parallel()
	png := filepath.Join(t.TempDir(), "eval.png")
	out, _, err := evalCLI(t, "eval", "--vars", "30", "--edges", "30", "--held-out", "8", "--contexts", "3000", "--seed", "4", "--plot", png)
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"condition", "support_only", "heldout", "supported", "mean(1)", "spearman"} {
		if !strings.Contains(out, want) {
			t.Errorf("table lacks %q:\n%s", want, out)
		}
	}
	b, err := os.ReadFile(png)
	if err != nil || !bytes.HasPrefix(b, []byte("\x89PNG")) {
		t.Errorf("plot %s: not a PNG (%v)", png, err)
	}
}
