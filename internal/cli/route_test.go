package cli

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// routeSource is a hand-made greenhouse index in which vent-north and
// bed-tomato are never observed together but both are observed with
// humidity-zone1 (ids by name: 0 bed-tomato, 1 humidity-zone1, 2 pump-2,
// 3 vent-north).
type routeSource struct{}

func (routeSource) Contexts() uint64 { return 412 } // each context observes one pair
func (routeSource) Entities() []graphidx.EntityRecord {
	return []graphidx.EntityRecord{
		{Name: "bed-tomato", Values: []string{"dry", "wet"}, Marginal: []uint64{96, 110}},
		{Name: "humidity-zone1", Values: []string{"high", "low"}, Marginal: []uint64{202, 198}},
		{Name: "pump-2", Values: []string{"off", "on"}, Marginal: []uint64{6, 6}},
		{Name: "vent-north", Values: []string{"closed", "open"}, Marginal: []uint64{103, 103}},
	}
}
func (routeSource) Pairs(fn func(graphidx.PairRecord) error) error {
	for _, p := range []graphidx.PairRecord{
		{A: 0, B: 1, Counts: []uint32{8, 85, 92, 15}},  // bed × humidity
		{A: 0, B: 2, Counts: []uint32{1, 2, 2, 1}},     // bed × pump
		{A: 1, B: 3, Counts: []uint32{90, 12, 10, 88}}, // humidity × vent
		{A: 2, B: 3, Counts: []uint32{2, 1, 1, 2}},     // pump × vent
	} {
		if err := fn(p); err != nil {
			return err
		}
	}
	return nil
}

func writeRouteIndex(t *testing.T) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "gh.hwx")
	if err := graphidx.WriteFile(path, routeSource{}); err != nil {
		t.Fatal(err)
	}
	return path
}

func TestRouteSingle(t *testing.T) {
	t.Parallel()
	idx := writeRouteIndex(t)
	out, err := routeCLI(t, "route", "--index", idx, "--from", "vent-north", "--value", "open", "--to", "bed-tomato")
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	for _, want := range []string{"decision   chain via humidity-zone1", "gain-above-threshold", "support 0 contexts", "weakest edge 200 contexts"} {
		if !strings.Contains(out, want) {
			t.Errorf("explanation lacks %q:\n%s", want, out)
		}
	}
	js, err := routeCLI(t, "route", "--index", idx, "--from", "vent-north", "--value", "open", "--to", "bed-tomato", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var line map[string]any
	if err := json.Unmarshal([]byte(js), &line); err != nil {
		t.Fatalf("%v: %s", err, js)
	}
	if line["mode"] != "chain" || line["chain"] == nil {
		t.Fatalf("json: %s", js)
	}
	// A high threshold from a config file, overridden back by a flag.
	cfg := filepath.Join(t.TempDir(), "route.json")
	os.WriteFile(cfg, []byte(`{"gain_threshold": 5}`), 0o644)
	js, _ = routeCLI(t, "route", "--index", idx, "--config", cfg, "--from", "vent-north", "--value", "open", "--to", "bed-tomato", "--json")
	if !strings.Contains(js, `"mode":"direct"`) || !strings.Contains(js, `"reason":"gain-below-threshold"`) {
		t.Fatalf("config threshold not applied: %s", js)
	}
	js, _ = routeCLI(t, "route", "--index", idx, "--config", cfg, "--gain-threshold", "0", "--from", "vent-north", "--value", "open", "--to", "bed-tomato", "--json")
	if !strings.Contains(js, `"mode":"chain"`) {
		t.Fatalf("flag did not override config: %s", js)
	}
	// Unknown entity: exit 2; bad config: exit 1 (plain error).
	_, err = routeCLI(t, "route", "--index", idx, "--from", "vent-east", "--value", "open", "--to", "bed-tomato")
	var ee *ExitError
	if !errors.As(err, &ee) || ee.Code != 2 {
		t.Fatalf("unknown entity: %v", err)
	}
	os.WriteFile(cfg, []byte(`{"beam": 0}`), 0o644)
	_, err = routeCLI(t, "route", "--index", idx, "--config", cfg, "--from", "vent-north", "--value", "open", "--to", "bed-tomato")
	if err == nil || errors.As(err, &ee) || !strings.Contains(err.Error(), `"beam"`) {
		t.Fatalf("bad config: %v", err)
	}
}

func TestRouteBatch(t *testing.T) {
	t.Parallel()
	idx := writeRouteIndex(t)
	qs := filepath.Join(t.TempDir(), "q.jsonl")
	input := strings.Join([]string{
		`{"id":"q1","from":"vent-north","value":"open","to":"bed-tomato"}`,
		`{"id":"q2","from":"vent-north","value":"ajar","to":"bed-tomato"}`,
		`not json`,
		`{"id":"q4","from":"humidity-zone1","value":"high","to":"bed-tomato"}`,
		``,
		`{"id":"q6","from":"pump-2","value":"on","to":"pump-2"}`,
		`{"id":"q7","from":"vent-north","value":"closed","to":"bed-tomato","extra":1}`,
		`{"id":"q8","from":"vent-north","value":"closed"}`,
		`{"id":"q9","from":"bed-tomato","value":"dry","to":"vent-north"}`,
	}, "\n") + "\n"
	os.WriteFile(qs, []byte(input), 0o644)
	out, err := routeCLI(t, "route", "--index", idx, "--queries", qs, "--workers", "3")
	var ee *ExitError
	if !errors.As(err, &ee) || ee.Code != 2 {
		t.Fatalf("want exit 2, got %v", err)
	}
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	if len(lines) != 9 {
		t.Fatalf("%d output lines for 9 input lines:\n%s", len(lines), out)
	}
	wantErr := map[int]string{1: "unknown value", 2: "line 3: not a JSON object", 4: "line 5: empty line", 5: "same entity", 6: `unknown field "extra"`, 7: `missing field "to"`}
	for i, l := range lines {
		var m map[string]any
		if err := json.Unmarshal([]byte(l), &m); err != nil {
			t.Fatalf("line %d not JSON: %s", i+1, l)
		}
		if sub, bad := wantErr[i]; bad {
			if e, _ := m["error"].(string); !strings.Contains(e, sub) {
				t.Errorf("line %d: error %q lacks %q", i+1, e, sub)
			}
			if _, ok := m["id"]; !ok {
				t.Errorf("line %d: no id key", i+1)
			}
			continue
		}
		// The decision view's contract (router.View).
		for _, k := range []string{"id", "from", "value", "to", "mode", "estimate", "error_measure", "sq_error_sum", "gain", "reason", "truncated", "direct", "chain"} {
			if _, ok := m[k]; !ok {
				t.Errorf("line %d lacks %q: %s", i+1, k, l)
			}
		}
		est := m["estimate"].(map[string]any)
		var sum float64
		for _, p := range est {
			sum += p.(float64)
		}
		if len(est) != 2 || math.Abs(sum-1) > 1e-9 {
			t.Errorf("line %d: estimate %v does not cover the target's values", i+1, est)
		}
		if cut, ok := m["cut"].([]any); (m["truncated"] == true) != (ok && len(cut) > 0) {
			t.Errorf("line %d: truncated %v with cut %v", i+1, m["truncated"], m["cut"])
		}
		d := m["direct"].(map[string]any)
		for _, k := range []string{"estimate", "sq_error_sum", "support"} {
			if _, ok := d[k]; !ok {
				t.Errorf("line %d: direct lacks %q", i+1, k)
			}
		}
	}
	if !strings.Contains(lines[0], `"id":"q1"`) || !strings.Contains(lines[0], `"bridges":["humidity-zone1"]`) {
		t.Errorf("q1: %s", lines[0])
	}
	// q4: adjacent with 200 contexts; the only chain (via vent and pump) has
	// weak edges, so the gain is negative and the answer direct.
	if !strings.Contains(lines[3], `"reason":"gain-below-threshold"`) || !strings.Contains(lines[3], `"mode":"direct"`) ||
		!strings.Contains(lines[3], `"bridges":["vent-north","pump-2"]`) {
		t.Errorf("q4: %s", lines[3])
	}
	if !strings.Contains(lines[8], `"id":"q9"`) {
		t.Errorf("q9 out of order: %s", lines[8])
	}

	// All good → exit 0; stdin works; order is kept with many workers.
	var good bytes.Buffer
	for i := 0; i < 300; i++ {
		if i%2 == 0 {
			good.WriteString(`{"id":"a` + itoa(i) + `","from":"vent-north","value":"open","to":"bed-tomato"}` + "\n")
		} else {
			good.WriteString(`{"id":"a` + itoa(i) + `","from":"bed-tomato","value":"wet","to":"vent-north"}` + "\n")
		}
	}
	root := NewRoot()
	var buf bytes.Buffer
	root.SetOut(&buf)
	root.SetIn(&good)
	root.SetArgs([]string{"route", "--index", idx, "--queries", "-", "--workers", "4"})
	if err := root.Execute(); err != nil {
		t.Fatal(err)
	}
	outs := strings.Split(strings.TrimSuffix(buf.String(), "\n"), "\n")
	if len(outs) != 300 {
		t.Fatalf("%d lines", len(outs))
	}
	for i, l := range outs {
		if !strings.HasPrefix(l, `{"id":"a`+itoa(i)+`",`) {
			t.Fatalf("line %d out of order: %s", i, l)
		}
	}
}

// routeCLI runs the root command with args and returns its output.
func routeCLI(t *testing.T, args ...string) (string, error) {
	t.Helper()
	root := NewRoot()
	var out bytes.Buffer
	root.SetOut(&out)
	root.SetErr(&out)
	root.SetArgs(args)
	err := root.Execute()
	return out.String(), err
}

func itoa(i int) string {
	b, _ := json.Marshal(i)
	return string(b)
}

// TestRouteBatchLongLastLine: a final line longer than --max-line-bytes with
// no newline after it gets its own error line; it used to be dropped as if
// the file had ended (found by FuzzRouteBatch in CI's short fuzzing).
func TestRouteBatchLongLastLine(t *testing.T) {
	t.Parallel()
	idx := writeRouteIndex(t)
	qs := filepath.Join(t.TempDir(), "q.jsonl")
	input := `{"id":"q1","from":"vent-north","value":"open","to":"bed-tomato"}` + "\n" + strings.Repeat("x", 300)
	if err := os.WriteFile(qs, []byte(input), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := routeCLI(t, "route", "--index", idx, "--queries", qs, "--max-line-bytes", "256")
	var ee *ExitError
	if !errors.As(err, &ee) || ee.Code != 2 {
		t.Fatalf("want exit 2, got %v", err)
	}
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	if len(lines) != 2 || !strings.Contains(lines[1], "line 2: longer than 256 bytes") {
		t.Fatalf("want 2 output lines, the second naming the long line 2; got %d:\n%s", len(lines), out)
	}
}

// TestRouteModelFlags: the Bayes constants' flags reach the router's
// configuration — a bad value names its field, and under a support-model
// config they are refused — and an in-domain value decides.
func TestRouteModelFlags(t *testing.T) {
	t.Parallel()
	idx := writeRouteIndex(t)
	q := []string{"--from", "vent-north", "--value", "open", "--to", "bed-tomato"}
	support := filepath.Join(t.TempDir(), "support.json")
	if err := os.WriteFile(support, []byte(`{"error_model": "support"}`), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"--noise-k", "-1"}, `"noise_k"`},
		{[]string{"--prior-strength", "0"}, `"prior_strength"`},
		{[]string{"--hop-alpha", "0"}, `"hop_alpha"`},
		{[]string{"--unseen-spread", "-0.5"}, `"unseen_spread"`},
		{[]string{"--config", support, "--separation", "0"}, `"separation"`},
	} {
		_, err := routeCLI(t, append(append([]string{"route", "--index", idx}, tc.args...), q...)...)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%v: error %v, want one naming %s", tc.args, err, tc.want)
		}
	}
	if out, err := routeCLI(t, append([]string{"route", "--index", idx, "--noise-k", "0", "--separation", "0.5"}, q...)...); err != nil {
		t.Errorf("in-domain model flags: %v\n%s", err, out)
	}
}

// TestExplainParallel: a decision whose chain reads its two bridges side by
// side (router.ChainResult.Parallel) is printed as such by route's text
// output, and a sequential chain of the same bridges as before.
func TestExplainParallel(t *testing.T) {
	for _, par := range []bool{true, false} {
		d := router.Decision{
			Mode: router.ModeChain, Bridges: []string{"sprinkler", "rain"}, Values: []string{"false", "true"},
			Estimate: []float64{0.27, 0.73}, Err: 2e-4, Reason: router.Reason{Code: router.ReasonGainAbove},
			Direct: router.DirectResult{Estimate: []float64{0.35, 0.65}, Err: 0.02},
			Chain:  &router.ChainResult{Bridges: []string{"sprinkler", "rain"}, Estimate: []float64{0.27, 0.73}, Err: 2e-4, MinSupport: 900, Parallel: par},
		}
		var b strings.Builder
		if err := explain(&b, routeQuery{From: "cloudy", Value: "true", To: "wetgrass"}, d, router.DefaultConfig(), router.MeasureSqErrorSum); err != nil {
			t.Fatal(err)
		}
		out := b.String()
		want := []string{"decision   chain via sprinkler and rain in parallel", "chain      cloudy → {sprinkler, rain} → wetgrass (parallel"}
		if !par {
			want = []string{"decision   chain via sprinkler → rain", "chain      cloudy → sprinkler → rain → wetgrass"}
		}
		for _, w := range want {
			if !strings.Contains(out, w) {
				t.Errorf("parallel %v: output lacks %q:\n%s", par, w, out)
			}
		}
	}
}
