package cli

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	sdktrace "go.opentelemetry.io/otel/sdk/trace"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
)

// bedLine builds a small greenhouse index: ten sensors along a bed row,
// each context observing three neighbours, so sensors three or more
// apart are never seen together and are reached through bridges.
func bedLine(t *testing.T, dir string) string {
	t.Helper()
	rng := rand.New(rand.NewPCG(7, 7))
	var b strings.Builder
	for c := range 6000 {
		start := rng.IntN(8)
		v := rng.IntN(2)
		obs := make([]string, 0, 3)
		for k := range 3 {
			if rng.Float64() < 0.15 {
				v ^= 1
			}
			obs = append(obs, fmt.Sprintf(`"bed-sensor-%d":"%s"`, start+k, []string{"dry", "wet"}[v]))
		}
		fmt.Fprintf(&b, `{"id":"c%d","obs":{%s}}`+"\n", c, strings.Join(obs, ","))
	}
	path := filepath.Join(dir, "beds.jsonl")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	rd, closer, err := corpus.Open(path, "jsonl", "")
	if err != nil {
		t.Fatal(err)
	}
	defer closer.Close()
	index := filepath.Join(dir, "beds.hwx")
	if _, err := graphidx.Build(context.Background(), rd, index); err != nil {
		t.Fatal(err)
	}
	return index
}

// bedQuery is the i-th query of the bed row traffic.
func bedQuery(rng *rand.Rand, key string) router.Query {
	from := rng.IntN(7)
	return router.Query{From: fmt.Sprintf("bed-sensor-%d", from), Value: []string{"dry", "wet"}[rng.IntN(2)],
		To: fmt.Sprintf("bed-sensor-%d", from+3), Key: key}
}

// runBeds sends n queries through a router with config c and returns the
// decisions; with path it traces them (decision and outcome spans) into
// that OTLP JSON Lines file. Outcomes: score 1 with probability 0.6, or
// 0.75 for chains, so chaining is better.
func runBeds(t *testing.T, index string, c router.Config, n int, seed uint64, path string) []router.Decision {
	t.Helper()
	ctx := context.Background()
	ix, err := graphidx.Open(index)
	if err != nil {
		t.Fatal(err)
	}
	opts, err := c.Options()
	if err != nil {
		t.Fatal(err)
	}
	r, err := router.New(ix, opts...)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	var in *otelx.Instrumentation
	var tp *sdktrace.TracerProvider
	if path != "" {
		exp, err := otlpfile.NewExporter(ctx, path)
		if err != nil {
			t.Fatal(err)
		}
		tp = sdktrace.NewTracerProvider(sdktrace.WithBatcher(exp, sdktrace.WithBlocking()))
		if in, err = otelx.New(otelx.WithTracerProvider(tp)); err != nil {
			t.Fatal(err)
		}
	}
	rng := rand.New(rand.NewPCG(seed, 3))
	var out []router.Decision
	for i := range n {
		q := bedQuery(rng, fmt.Sprintf("bed-unit-%d-%05d", seed, i))
		if in == nil {
			d, err := r.Decide(ctx, q)
			if err != nil {
				t.Fatal(err)
			}
			out = append(out, d)
			continue
		}
		d, err := in.Decide(ctx, r, q)
		if err != nil {
			t.Fatal(err)
		}
		p := 0.6
		if d.Mode == router.ModeChain {
			p = 0.75
		}
		score := 0.0
		if rng.Float64() < p {
			score = 1
		}
		if err := in.RecordOutcome(ctx, d, otelx.Outcome{Score: score, InputTokens: 300, OutputTokens: 40, Latency: 80 * time.Millisecond}); err != nil {
			t.Fatal(err)
		}
		out = append(out, d)
	}
	if tp != nil {
		if err := tp.Shutdown(ctx); err != nil {
			t.Fatal(err)
		}
	}
	return out
}

// execTune runs `hopwise tune args...` and returns its output and error.
func execTune(args ...string) (string, error) {
	var buf bytes.Buffer
	root := NewRoot()
	root.SetOut(&buf)
	root.SetErr(&bytes.Buffer{})
	root.SetArgs(append([]string{"tune"}, args...))
	err := root.Execute()
	return buf.String(), err
}

// TestTuneDeployLoop: tune → write config → router.LoadConfig → a router
// that explores with the same arms and ε as the logging router, whether
// the deployed config is given as --base (its hash key, salt and fitted β
// kept) or read off the logs; defaults are left out of the file, never
// written as zeros.
func TestTuneDeployLoop(t *testing.T) {
	if testing.Short() {
		t.Skip("builds an index and traces 3000 decisions")
	}
	t.Parallel()
	dir := t.TempDir()
	index := bedLine(t, dir)
	deployed := router.DefaultConfig()
	deployed.Exploration, deployed.ExplorationSalt = 0.2, "bed-row"
	deployed.Arms = []router.ArmWeight{{Arm: router.ArmRouted, Weight: 0.7}, {Arm: router.ArmDirectOnly, Weight: 0.3}}
	deployed.HashKey = "000102030405060708090a0b0c0d0e0f"
	deployed.Beta = 0.0007 // a refitted constant
	base := filepath.Join(dir, "deployed.json")
	if err := router.SaveConfig(base, deployed); err != nil {
		t.Fatal(err)
	}
	traces := filepath.Join(dir, "traces.jsonl")
	logged := runBeds(t, index, deployed, 3000, 1, traces)
	chains := 0
	for _, d := range logged {
		if d.Chain != nil {
			chains++
		}
	}
	if chains < 1000 {
		t.Fatalf("only %d of %d decisions had a chain", chains, len(logged))
	}

	for _, c := range []struct {
		name string
		args []string
		want router.Config // fields compared: exploration, salt, arms, hash key, beta
	}{
		{"base", []string{"--base", base}, deployed},
		{"logs", nil, func() router.Config {
			c := router.DefaultConfig()
			c.Exploration, c.Arms = 0.2, deployed.Arms
			return c
		}()},
	} {
		t.Run(c.name, func(t *testing.T) {
			out := filepath.Join(dir, c.name+"-tuned.json")
			text, err := execTune(append([]string{"--traces", traces, "--reps", "100", "--out", out}, c.args...)...)
			if err != nil {
				t.Fatalf("tune: %v\n%s", err, text)
			}
			raw, err := os.ReadFile(out)
			if err != nil {
				t.Fatalf("no config written: %v\n%s", err, text)
			}
			for _, zero := range []string{`"support_v0"`, `"support_n0"`, `"hash_key": ""`, `"arms": null`, `"exploration": 0,`, `"exploration_salt": ""`} {
				if bytes.Contains(raw, []byte(zero)) {
					t.Errorf("written config holds %s:\n%s", zero, raw)
				}
			}
			got, err := router.LoadConfig(out)
			if err != nil {
				t.Fatal(err)
			}
			if got.Exploration != c.want.Exploration || got.ExplorationSalt != c.want.ExplorationSalt || got.HashKey != c.want.HashKey || got.Beta != c.want.Beta {
				t.Errorf("written config %+v, want exploration, salt, hash key and β of %+v", got, c.want)
			}
			if len(got.Arms) != 2 {
				t.Fatalf("arms %+v", got.Arms)
			}
			for i, a := range got.Arms {
				w := c.want.Arms[i] // heaviest arm first, as listed in the deployed config
				if a.Arm != w.Arm || a.Weight < w.Weight-0.03 || a.Weight > w.Weight+0.03 {
					t.Errorf("arm %d: %+v, want %+v", i, a, w)
				}
			}
			// The deployed router explores with the same arms and ε.
			ds := runBeds(t, index, got, 2000, 2, "")
			arms := map[string]int{}
			explored, routed := 0, 0
			for _, d := range ds {
				arms[d.Arm]++
				if d.Arm != router.ArmRouted || d.Chain == nil {
					continue
				}
				routed++
				if d.Propensity != 0.2 && d.Propensity != 0.8 {
					t.Fatalf("routed decision with propensity %v", d.Propensity)
				}
				if d.Explored {
					explored++
				}
			}
			share := float64(explored) / float64(routed)
			if len(arms) != 2 || share < 0.15 || share > 0.25 {
				t.Errorf("deployed router: arms %v, exploration share %.3f of %d routed decisions with a chain", arms, share, routed)
			}
			t.Logf("%s: arms %v, explored %.3f; config:\n%s", c.name, arms, share, raw)
		})
	}
}

// writeSyntheticTraces writes n decision and outcome spans of an
// exploring routed policy (ε = 0.2, τ = 0) by hand; every outcome score
// is 1, so no policy can beat another.
func writeSyntheticTraces(t *testing.T, path string, n int) {
	t.Helper()
	rng := rand.New(rand.NewPCG(11, 11))
	var b strings.Builder
	for i := range n {
		score := rng.Float64()*0.2 - 0.05
		mode, prop, reason := "direct", 0.8, "gain-below-threshold"
		if score >= 0 {
			mode, reason = "chain", "gain-above-threshold"
		}
		if rng.Float64() < 0.2 {
			mode, prop, reason = map[string]string{"direct": "chain", "chain": "direct"}[mode], 0.2, "explore"
		}
		fmt.Fprintf(&b, `{"resourceSpans":[{"scopeSpans":[{"spans":[`+
			`{"traceId":"%032x","spanId":"%016x","name":"hopwise.decide","startTimeUnixNano":"%d","attributes":[`+
			`{"key":"hopwise.query.key","value":{"stringValue":"vent-%d"}},{"key":"hopwise.route.mode","value":{"stringValue":"%s"}},`+
			`{"key":"hopwise.route.gain","value":{"doubleValue":%v}},{"key":"hopwise.route.reason","value":{"stringValue":"%s"}},`+
			`{"key":"hopwise.route.propensity","value":{"doubleValue":%v}},{"key":"hopwise.chain.err","value":{"doubleValue":0.02}},`+
			`{"key":"hopwise.chain.hops","value":{"intValue":"%d"}}]},`+
			`{"traceId":"%032x","spanId":"%016x","name":"hopwise.outcome","attributes":[`+
			`{"key":"hopwise.query.key","value":{"stringValue":"vent-%d"}},{"key":"hopwise.outcome.score","value":{"doubleValue":1}}]}]}]}]}`+"\n",
			i+1, 2*i+1, 1700000000000000000+int64(i), i, mode, score, reason, prop, 1+i%2, i+1, 2*i+2, i)
	}
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
}

// TestTuneKeepsCurrentWithoutEvidence: when every policy has the same
// value, tune does not recommend a change: it says to keep the current
// setting and why, in the text and as the JSON decision.
func TestTuneKeepsCurrentWithoutEvidence(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	traces := filepath.Join(dir, "t.jsonl")
	writeSyntheticTraces(t, traces, 1500)
	text, err := execTune("--traces", traces, "--reps", "50", "--out", filepath.Join(dir, "c.json"))
	if err != nil || !strings.Contains(text, "recommended: keep the current setting") || !strings.Contains(text, "includes zero") && !strings.Contains(text, "highest") {
		t.Errorf("tune output does not say to keep the current setting and why (%v):\n%s", err, text)
	}
	js, err := execTune("--traces", traces, "--reps", "50", "--json")
	var rep struct{ Decision, Why string }
	if err != nil || json.Unmarshal([]byte(js), &rep) != nil || rep.Decision != "keep" || rep.Why == "" {
		t.Errorf("JSON decision %+v (%v)", rep, err)
	}
}

// TestTuneTauDigits: neighbouring thresholds print differently.
func TestTuneTauDigits(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	traces := filepath.Join(dir, "t.jsonl")
	writeSyntheticTraces(t, traces, 1500)
	text, _ := execTune("--traces", traces, "--reps", "20", "--taus", "0.1234561,0.1234569")
	taus := map[string]bool{}
	for _, line := range strings.Split(text, "\n") {
		if f := strings.Fields(line); len(f) > 2 && f[1] == "3" {
			if _, err := strconv.ParseFloat(f[0], 64); err == nil {
				taus[f[0]] = true
			}
		}
	}
	if len(taus) != 3 { // 0 (current), 0.1234561, 0.1234569
		t.Errorf("τ column %v: want 3 distinct values\n%s", taus, text)
	}
}

// TestTraceFilesAsArguments: the documented `--traces day1.jsonl
// day2.jsonl` reads both files, as do a repeated flag and plain
// arguments; a span in both files counts once.
func TestTraceFilesAsArguments(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	day1, day2 := filepath.Join(dir, "day1.jsonl"), filepath.Join(dir, "day2.jsonl")
	writeSyntheticTraces(t, day1, 600)
	writeSyntheticTraces(t, day2, 600) // the same spans: duplicates
	for _, args := range [][]string{
		{"--traces", day1, day2},
		{"--traces", day1, "--traces", day2},
		{day1, day2},
	} {
		text, err := execTune(append(args, "--reps", "20", "--json")...)
		if err != nil {
			t.Fatalf("%v: %v", args, err)
		}
		var rep struct {
			Files []string `json:"files"`
			Read  struct {
				Decisions  int `json:"decisions"`
				Duplicates int `json:"duplicate_spans"`
			} `json:"read"`
		}
		if err := json.Unmarshal([]byte(text), &rep); err != nil {
			t.Fatalf("%v: %v\n%.300s", args, err, text)
		}
		if len(rep.Files) != 2 || rep.Read.Decisions != 600 || rep.Read.Duplicates != 1200 {
			t.Errorf("%v: files %v, %d decisions, %d duplicates; want 2 files, 600 decisions, 1200 duplicate spans", args, rep.Files, rep.Read.Decisions, rep.Read.Duplicates)
		}
	}
}

// TestABRejectsTokenOverflow: token counts whose sum overflows int64 used
// to give a negative mean cost; now the outcomes file is rejected naming
// the file, line and field.
func TestABRejectsTokenOverflow(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	var spans, outs strings.Builder
	for i, arm := range []string{"routed", "direct-only", "routed", "direct-only"} {
		fmt.Fprintf(&spans, `{"resourceSpans":[{"scopeSpans":[{"spans":[{"traceId":"%032x","spanId":"%016x","name":"hopwise.decide","attributes":[`+
			`{"key":"hopwise.query.key","value":{"stringValue":"pump-%d"}},{"key":"hopwise.route.mode","value":{"stringValue":"direct"}},`+
			`{"key":"hopwise.ab.arm","value":{"stringValue":"%s"}}]}]}]}]}`+"\n", i+1, i+1, i, arm)
		tokens := "300"
		if i == 1 {
			tokens = "9000000000000000000"
		}
		fmt.Fprintf(&outs, `{"unit":"pump-%d","score":1,"input_tokens":%s,"output_tokens":%s}`+"\n", i, tokens, tokens)
	}
	traces, outcomes := filepath.Join(dir, "t.jsonl"), filepath.Join(dir, "o.jsonl")
	if err := os.WriteFile(traces, []byte(spans.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(outcomes, []byte(outs.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	root := NewRoot()
	root.SetOut(&bytes.Buffer{})
	root.SetErr(&bytes.Buffer{})
	root.SetArgs([]string{"ab", traces, "--outcomes", outcomes})
	if err := root.Execute(); err == nil || !strings.Contains(err.Error(), "o.jsonl:2: field input_tokens: 9000000000000000000 above the limit") {
		t.Errorf("err = %v", err)
	}
}
