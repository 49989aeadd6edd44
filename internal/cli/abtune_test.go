package cli

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	sdktrace "go.opentelemetry.io/otel/sdk/trace"
	"go.opentelemetry.io/otel/trace"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/abreport"
	"github.com/hopwise/hopwise/internal/eval"
	"github.com/hopwise/hopwise/internal/ope"
	"github.com/hopwise/hopwise/internal/tuner"
	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/otelx/otlpfile"
	"github.com/hopwise/hopwise/router"
)

// e2eQuery is one query of the traffic pool with its exact answer.
type e2eQuery struct {
	q     router.Query
	truth []float64
	held  bool
}

// e2eWorld is a synthetic world (internal/world) with its index built by
// the real builder (internal/eval.Prepare) and a query pool: every
// held-out pair (never observed together) and as many supported pairs,
// both directions, every value.
type e2eWorld struct {
	bench *eval.Bench
	index string // path of the built index; each router opens its own copy
	held  []e2eQuery
	supp  []e2eQuery
}

// newRouter opens the index and starts a router on it; the router closes
// the index when it is closed.
func (e *e2eWorld) newRouter(t *testing.T, opts ...router.Option) *router.Router {
	t.Helper()
	ix, err := graphidx.Open(e.index)
	if err != nil {
		t.Fatal(err)
	}
	r, err := router.New(ix, opts...)
	if err != nil {
		ix.Close()
		t.Fatal(err)
	}
	return r
}

func newE2EWorld(t *testing.T) *e2eWorld {
	t.Helper()
	start := time.Now()
	dir := t.TempDir()
	b, err := eval.Prepare(context.Background(), eval.Config{
		Seed: 5, World: &world.Config{Vars: 60, Edges: 60, HeldOut: 20}, Contexts: 20000, Dir: dir,
	})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.Close() })
	w := b.World
	e := &e2eWorld{bench: b, index: filepath.Join(dir, "index.hwx")}
	add := func(dst *[]e2eQuery, pairs [][2]int, held bool, limit int) {
		for _, p := range pairs {
			for _, d := range [][2]int{{p[0], p[1]}, {p[1], p[0]}} {
				for u := range w.Card(d[0]) {
					if limit > 0 && len(*dst) >= limit {
						return
					}
					truth, err := w.TrueConditional(d[0], u, d[1])
					if err != nil {
						t.Fatal(err)
					}
					*dst = append(*dst, e2eQuery{
						q:     router.Query{From: w.Name(d[0]), Value: w.Labels(d[0])[u], To: w.Name(d[1])},
						truth: truth, held: held,
					})
				}
			}
		}
	}
	add(&e.held, w.HeldOut(), true, 0)
	add(&e.supp, w.Supported(), false, len(e.held))
	t.Logf("world: %d held-out and %d supported queries, prepared in %v", len(e.held), len(e.supp), time.Since(start).Round(time.Millisecond))
	return e
}

// draw picks a query: held-out or supported with probability 1/2 each,
// then uniformly within the set.
func (e *e2eWorld) draw(r *rand.Rand) e2eQuery {
	if r.IntN(2) == 0 {
		return e.held[r.IntN(len(e.held))]
	}
	return e.supp[r.IntN(len(e.supp))]
}

// quality is the probability that an answer drawn from the estimate is
// judged right: 1 − total variation distance to the truth.
func quality(est, truth []float64) float64 {
	if len(est) != len(truth) {
		return 0
	}
	var tv float64
	for i := range est {
		tv += math.Abs(est[i] - truth[i])
	}
	return 1 - tv/2
}

func tokens(d router.Decision) (in, out int64) {
	in, out = 300, 40
	if d.Mode == router.ModeChain {
		h := int64(len(d.Bridges))
		in += 120 * h
		out += 60 * h
	}
	return
}

// simulate runs n units of gateway traffic through the router and the otelx
// instrumentation into an OTLP JSON Lines file, sampling traces at ratio,
// and reports each outcome (a Bernoulli draw of the answer's quality).
func (e *e2eWorld) simulate(t *testing.T, path string, n int, ratio float64, seed uint64, opts ...router.Option) {
	t.Helper()
	ctx := context.Background()
	r := e.newRouter(t, opts...)
	defer r.Close()
	exp, err := otlpfile.NewExporter(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	// WithBlocking: a full queue waits instead of dropping spans, which
	// would be sampling that no span records.
	tp := sdktrace.NewTracerProvider(sdktrace.WithBatcher(exp, sdktrace.WithBlocking()),
		sdktrace.WithSampler(sdktrace.TraceIDRatioBased(ratio)),
		sdktrace.WithIDGenerator(&seededIDs{r: rand.New(rand.NewPCG(seed, 1))}))
	in, err := otelx.New(otelx.WithTracerProvider(tp), otelx.WithSamplingRatio(ratio))
	if err != nil {
		t.Fatal(err)
	}
	gw := tp.Tracer("greenhouse-gateway")
	rng := rand.New(rand.NewPCG(seed, 2))
	for i := range n {
		eq := e.draw(rng)
		q := eq.q
		q.Key = fmt.Sprintf("unit-%d-%06d", seed, i)
		// One trace per gateway request holds the decision and the
		// outcome, so the sampler keeps or drops them together.
		rctx, req := gw.Start(ctx, "gateway.request")
		d, err := in.Decide(rctx, r, q)
		if err != nil {
			t.Fatal(err)
		}
		score := 0.0
		if rng.Float64() < quality(d.Estimate, eq.truth) {
			score = 1
		}
		ti, to := tokens(d)
		if err := in.RecordOutcome(rctx, d, otelx.Outcome{Score: score, InputTokens: ti, OutputTokens: to, Latency: time.Duration(50+rng.IntN(50)) * time.Millisecond}); err != nil {
			t.Fatal(err)
		}
		req.End()
	}
	if err := tp.Shutdown(ctx); err != nil {
		t.Fatal(err)
	}
}

// trueValue is the exact expected score of the policy (τ, H) over the
// traffic mixture, from the router's own estimates without arms or
// exploration and the world's exact conditionals.
type policyTruth struct {
	direct, chain []float64 // quality of each answer, held then supp
	score         []float64
	hops          []int
	hasChain      []bool
	nHeld         int
}

func (e *e2eWorld) truth(t *testing.T) *policyTruth {
	r := e.newRouter(t)
	defer r.Close()
	pt := &policyTruth{nHeld: len(e.held)}
	for _, eq := range append(append([]e2eQuery(nil), e.held...), e.supp...) {
		d, err := r.Decide(context.Background(), eq.q)
		if err != nil {
			t.Fatal(err)
		}
		pt.direct = append(pt.direct, quality(d.Direct.Estimate, eq.truth))
		if d.Chain != nil {
			pt.chain = append(pt.chain, quality(d.Chain.Estimate, eq.truth))
			pt.hops = append(pt.hops, len(d.Chain.Bridges))
		} else {
			pt.chain = append(pt.chain, 0)
			pt.hops = append(pt.hops, 0)
		}
		pt.hasChain = append(pt.hasChain, d.Chain != nil)
		pt.score = append(pt.score, d.Score)
	}
	return pt
}

func (pt *policyTruth) value(tau float64, maxHops int) float64 {
	var held, supp float64
	for i := range pt.direct {
		v := pt.direct[i]
		if pt.hasChain[i] && pt.score[i] >= tau && pt.hops[i] <= maxHops {
			v = pt.chain[i]
		}
		if i < pt.nHeld {
			held += v
		} else {
			supp += v
		}
	}
	return 0.5*held/float64(pt.nHeld) + 0.5*supp/float64(len(pt.direct)-pt.nHeld)
}

// seededIDs makes trace ids (and so the ratio sampler's choices)
// reproducible.
type seededIDs struct {
	mu sync.Mutex
	r  *rand.Rand
}

func (g *seededIDs) NewIDs(context.Context) (tid trace.TraceID, sid trace.SpanID) {
	g.mu.Lock()
	defer g.mu.Unlock()
	for i := range tid {
		tid[i] = byte(g.r.Uint32())
	}
	for i := range sid {
		sid[i] = byte(g.r.Uint32())
	}
	return
}

func (g *seededIDs) NewSpanID(context.Context, trace.TraceID) (sid trace.SpanID) {
	g.mu.Lock()
	defer g.mu.Unlock()
	for i := range sid {
		sid[i] = byte(g.r.Uint32())
	}
	return
}

// The end-to-end check: routed traffic with arms and exploration on
// a synthetic world, traces written, tune recommends a threshold whose true
// value is within 5% of the best on its grid, ab detects routed vs
// direct-only and nothing in an A/A split.
func TestEndToEndTuneAndAB(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end world build")
	}
	t.Parallel()
	e := newE2EWorld(t)
	dir := t.TempDir()
	if keep := *keepE2E; keep != "" { // keep traces, config and plots for a look
		dir = keep
		if err := os.MkdirAll(dir, 0o755); err != nil {
			t.Fatal(err)
		}
	}
	traces := filepath.Join(dir, "traces.jsonl")
	e.simulate(t, traces, 24000, 0.5, 1,
		router.WithArms(router.ArmWeight{Arm: router.ArmRouted, Weight: 0.5}, router.ArmWeight{Arm: router.ArmDirectOnly, Weight: 0.5}),
		router.WithExploration(0.2, "e2e"))

	// tune
	out := filepath.Join(dir, "tuned.json")
	to := tuneOpts(traces)
	to.out, to.plotDir, to.Reps = out, filepath.Join(dir, "plots"), 200
	rep, err := runTune(to, nil)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Best == nil || rep.Config == nil {
		t.Fatalf("no recommendation: %s", rep.Why)
	}
	pt := e.truth(t)
	best := math.Inf(-1)
	var bestTau float64
	var bestH int
	for _, p := range rep.Policies {
		if v := pt.value(p.Tau, p.MaxHops); v > best {
			best, bestTau, bestH = v, p.Tau, p.MaxHops
		}
	}
	got := pt.value(rep.Config.GainThreshold, rep.Config.MaxBridges)
	t.Logf("tune: %s τ=%.5g H=%d (best estimated τ=%.5g H=%d, DR %v: %s), true value %.4f; best on grid τ=%.5g H=%d true %.4f; all-direct %.4f, current τ=0 H=3 %.4f; used %d samples",
		rep.Decision, rep.Config.GainThreshold, rep.Config.MaxBridges, rep.Best.Tau, rep.Best.MaxHops, rep.Best.DR.Value, rep.Why, got, bestTau, bestH, best, pt.value(math.Inf(1), 3), pt.value(0, 3), rep.Used)
	if got < 0.95*best {
		t.Errorf("recommended policy's true value %.4f is not within 5%% of the grid's best %.4f", got, best)
	}
	cfg, err := router.LoadConfig(out)
	if err != nil {
		t.Fatal(err)
	}
	if cfg.GainThreshold != rep.Config.GainThreshold || cfg.MaxBridges != rep.Config.MaxBridges || cfg.Exploration != 0.2 || len(cfg.Arms) != 2 {
		t.Errorf("written config %+v", cfg)
	}
	for _, p := range rep.Plots {
		if st, err := os.Stat(p); err != nil || st.Size() < 1000 {
			t.Errorf("plot %s: %v", p, err)
		}
	}
	// The DR interval of the recommended policy should cover its true value
	// (a 95% interval, so this is a probabilistic check, seeded).
	if !rep.Best.DR.Value.Contains(got) {
		t.Logf("note: DR interval %v does not cover the true value %.4f", rep.Best.DR.Value, got)
	}

	// Priced tokens: at 1e-3 per token a chain's extra ~88 tokens cost more
	// than its +0.03 score, so the priced recommendation chains less.
	po := tuneOpts(traces)
	po.Objective, po.CostPerToken, po.Reps = tuner.ObjectiveScoreCost, 1e-3, 100
	priced, err := runTune(po, nil)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("tune score-cost: τ=%.5g H=%d chain share %.3f (score-only %.3f)", priced.Best.Tau, priced.Best.MaxHops, priced.Best.ChainShare, rep.Best.ChainShare)
	if priced.Best.ChainShare >= rep.Best.ChainShare {
		t.Errorf("pricing tokens did not reduce chaining: %.3f vs %.3f", priced.Best.ChainShare, rep.Best.ChainShare)
	}

	// ab: routed vs direct-only
	ao := abOpts(traces)
	ao.Reps, ao.allocation, ao.Power, ao.MDE = 500, "routed=0.5,direct-only=0.5", 0.8, 0.02
	ab, err := runAB(nil, ao, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(ab.Diffs) != 1 || ab.Control != router.ArmDirectOnly {
		t.Fatalf("diffs %+v", ab.Diffs)
	}
	d := ab.Diffs[0]
	t.Logf("ab routed − direct-only: success %v, z %.2f, score Welch %v, SRM p %.3f", d.Success, d.Z.Z, d.Score.Interval, ab.SRM.P)
	if !d.Significant || d.Success.Lo <= 0 {
		t.Errorf("routed vs direct-only: no significant improvement detected: %v", d.Success)
	}
	if ab.SRM.Mismatch {
		t.Errorf("sample ratio mismatch on a 50/50 allocation: %+v", ab.SRM)
	}

	// The same outcomes as a plain JSONL file give the same comparison.
	lg, err := otelx.ReadTraceFiles(traces)
	if err != nil {
		t.Fatal(err)
	}
	var plain bytes.Buffer
	for _, o := range lg.Outcomes {
		fmt.Fprintf(&plain, `{"unit":%q,"score":%g,"input_tokens":%d,"output_tokens":%d,"latency_ms":%g}`+"\n", o.Key, o.Score, o.InputTokens, o.OutputTokens, o.LatencyMs)
	}
	outPath := filepath.Join(dir, "outcomes.jsonl")
	if err := os.WriteFile(outPath, plain.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	vo := abOpts(traces)
	vo.outcomes, vo.Reps = outPath, 0
	viaFile, err := runAB(nil, vo, nil)
	if err != nil {
		t.Fatal(err)
	}
	if viaFile.Diffs[0].Success != d.Success || viaFile.Join.Joined != ab.Join.Joined || viaFile.Ignored != len(lg.Outcomes) {
		t.Errorf("plain outcomes file: %v joined %d, spans: %v joined %d", viaFile.Diffs[0].Success, viaFile.Join.Joined, d.Success, ab.Join.Joined)
	}

	// A/A: the routed arm with an unreachable threshold and no exploration
	// answers exactly like direct-only.
	aa := filepath.Join(dir, "aa.jsonl")
	e.simulate(t, aa, 12000, 1, 2,
		router.WithArms(router.ArmWeight{Arm: router.ArmRouted, Weight: 0.5}, router.ArmWeight{Arm: router.ArmDirectOnly, Weight: 0.5}),
		router.WithGainThreshold(1e9))
	aao := abOpts(aa)
	aao.Reps, aao.allocation = 500, "routed=1,direct-only=1"
	aaRep, err := runAB(nil, aao, nil)
	if err != nil {
		t.Fatal(err)
	}
	ad := aaRep.Diffs[0]
	t.Logf("A/A: success %v, z %.2f, SRM p %.3f", ad.Success, ad.Z.Z, aaRep.SRM.P)
	if ad.Significant || !ad.Score.Contains(0) {
		t.Errorf("A/A split shows a difference: %+v", ad)
	}
	// Without exploration the logger is deterministic: tune refuses every
	// policy that differs from it and writes no config.
	noOut := filepath.Join(dir, "none.json")
	at := tuneOpts(aa)
	at.out, at.taus, at.maxBridges, at.Reps = noOut, "0,0.01", "3", 50
	aaTune, err := runTune(at, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range aaTune.Policies {
		if p.Supported && p.ChainShare > 0 {
			t.Errorf("policy τ=%v supported without exploration: %+v", p.Tau, p)
		}
	}

	// The commands through cobra, text output.
	var buf bytes.Buffer
	root := NewRoot()
	root.SetOut(&buf)
	root.SetArgs([]string{"ab", "--traces", traces, "--allocation", "routed=0.5,direct-only=0.5"})
	if err := root.Execute(); err != nil {
		t.Fatal(err)
	}
	if s := buf.String(); !strings.Contains(s, "routed − direct-only") || !strings.Contains(s, "Newcombe") || !strings.Contains(s, "consistent with the allocation") {
		t.Errorf("ab output:\n%s", s)
	}
	buf.Reset()
	root = NewRoot()
	root.SetOut(&buf)
	root.SetArgs([]string{"tune", "--traces", traces, "--reps", "50", "--out", filepath.Join(dir, "t2.json")})
	if err := root.Execute(); err != nil {
		t.Fatal(err)
	}
	if s := buf.String(); !strings.Contains(s, "recommended: ") {
		t.Errorf("tune output:\n%s", s)
	}
	for _, args := range [][]string{
		{"ab", "--traces", traces, "--json", "--config", writeArmsConfig(t, dir)},
		{"tune", "--traces", traces, "--reps", "50", "--json"},
	} {
		buf.Reset()
		root = NewRoot()
		root.SetOut(&buf)
		root.SetArgs(args)
		if err := root.Execute(); err != nil {
			t.Fatalf("%v: %v", args, err)
		}
		var v map[string]any
		if err := json.Unmarshal(buf.Bytes(), &v); err != nil {
			t.Fatalf("%v: output is not JSON: %v\n%.500s", args, err, buf.String())
		}
		if _, ok := v["join"]; !ok {
			t.Errorf("%v: JSON without join stats: %.300s", args, buf.String())
		}
	}
}

func writeArmsConfig(t *testing.T, dir string) string {
	c := router.DefaultConfig()
	c.Arms = []router.ArmWeight{{Arm: router.ArmRouted, Weight: 1}, {Arm: router.ArmDirectOnly, Weight: 1}}
	path := filepath.Join(dir, "arms.json")
	if err := router.SaveConfig(path, c); err != nil {
		t.Fatal(err)
	}
	return path
}

func TestTuneRefusesMissingPropensity(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	// Two decision spans written by hand without hopwise.route.propensity,
	// each with an outcome span.
	var b strings.Builder
	for i, mode := range []string{"direct", "chain"} {
		fmt.Fprintf(&b, `{"resourceSpans":[{"scopeSpans":[{"spans":[`+
			`{"traceId":"0af7651916cd43dd8448eb211c80319%d","spanId":"b7ad6b716920333%d","name":"hopwise.decide","startTimeUnixNano":"1700000000000000000",`+
			`"attributes":[{"key":"hopwise.query.key","value":{"stringValue":"u%d"}},{"key":"hopwise.route.mode","value":{"stringValue":"%s"}},`+
			`{"key":"hopwise.route.gain","value":{"doubleValue":0.01}},{"key":"hopwise.route.reason","value":{"stringValue":"gain-above-threshold"}},`+
			`{"key":"hopwise.chain.err","value":{"doubleValue":0.02}},{"key":"hopwise.chain.hops","value":{"intValue":"1"}}]},`+
			`{"traceId":"0af7651916cd43dd8448eb211c80319%d","spanId":"c7ad6b716920333%d","name":"hopwise.outcome",`+
			`"attributes":[{"key":"hopwise.query.key","value":{"stringValue":"u%d"}},{"key":"hopwise.outcome.score","value":{"doubleValue":1}}]}]}]}]}`+"\n",
			i, i, i, mode, i, i, i)
	}
	path := filepath.Join(dir, "t.jsonl")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	mo := tuneOpts(path)
	mo.taus, mo.maxBridges, mo.MinESS, mo.Reps, mo.out = "0", "1", 1, 10, filepath.Join(dir, "x.json")
	_, err := runTune(mo, nil)
	if !errors.Is(err, ope.ErrMissingPropensity) || !strings.Contains(err.Error(), "t.jsonl:1") {
		t.Fatalf("err = %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "x.json")); err == nil {
		t.Error("config written despite the refusal")
	}
	// ab needs arms.
	if _, err := runAB(nil, abOpts(path), nil); err == nil || !strings.Contains(err.Error(), "no A/B arm") {
		t.Errorf("ab without arms: %v", err)
	}
}

func TestABTuneFlagErrors(t *testing.T) {
	t.Parallel()
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"ab"}, "--traces"},
		{[]string{"ab", "--traces", "x", "--allocation", "routed"}, "not arm=weight"},
		{[]string{"ab", "--traces", "x", "--confidence", "2"}, "confidence 2"},
		{[]string{"ab", "--traces", "x", "--alpha", "0.01"}, "--alpha was renamed"},
		{[]string{"tune", "--traces", "x", "--objective", "speed"}, "objective \"speed\""},
		{[]string{"tune", "--traces", "x", "--objective", "score-cost"}, "cost per token"},
		{[]string{"tune", "--traces", "x", "--estimator", "mean"}, "estimator \"mean\""},
		{[]string{"tune", "--traces", "x", "--max-bridges", "1.5"}, "--max-bridges: 1.5"},
		{[]string{"tune", "--traces", "x", "--confidence", "1.5"}, "confidence 1.5"},
		{[]string{"tune", "--traces", "x", "--floor", "0"}, "propensity floor 0"},
		{[]string{"tune", "--traces", "/nonexistent/t.jsonl"}, "no such file"},
		// An arm given twice is named, not reported as "need at least two
		// arms"; an --out that is a directory is refused before the
		// traces are read (it failed at the final rename, with a
		// temporary file created in the directory above).
		{[]string{"ab", "--traces", "x", "--allocation", "routed=0.5,routed=0.5"}, `--allocation: arm "routed" given twice`},
		{[]string{"tune", "--traces", "/nonexistent/t.jsonl", "--out", os.TempDir()}, "--out: graphidx: output " + os.TempDir() + " is a directory"},
	}
	for _, c := range cases {
		root := NewRoot()
		root.SetOut(&bytes.Buffer{})
		root.SetErr(&bytes.Buffer{})
		root.SetArgs(c.args)
		err := root.Execute()
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v: err = %v, want %q", c.args, err, c.want)
		}
	}
}

// TestABRepeatedUnitsResampleUnits: when a unit key carries several
// decisions whose outcomes are correlated (here identical within a unit),
// ab's bootstrap resamples units and reports a design effect near the
// cluster size (Kish 1965 §5.4: 1 + (m − 1)·ρ with ρ = 1, m = 6).
func TestABRepeatedUnitsResampleUnits(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	var spans, outs strings.Builder
	n := 0
	for _, arm := range []string{"direct-only", "routed"} {
		for u := range 30 {
			key := fmt.Sprintf("%s-bed-%02d", arm, u)
			score := float64((u*7 + len(arm)) % 2)
			for d := range 6 {
				fmt.Fprintf(&spans, `{"resourceSpans":[{"scopeSpans":[{"spans":[`+
					`{"traceId":"%032x","spanId":"%016x","name":"hopwise.decide","startTimeUnixNano":"%d",`+
					`"attributes":[{"key":"hopwise.query.key","value":{"stringValue":"%s"}},{"key":"hopwise.route.mode","value":{"stringValue":"direct"}},`+
					`{"key":"hopwise.ab.arm","value":{"stringValue":"%s"}},{"key":"hopwise.route.propensity","value":{"doubleValue":1}}]}]}]}]}`+"\n",
					n+1, n+1, 1700000000000000000+int64(d), key, arm)
				fmt.Fprintf(&outs, `{"unit":%q,"score":%g}`+"\n", key, score)
				n++
			}
		}
	}
	traces, outcomes := filepath.Join(dir, "t.jsonl"), filepath.Join(dir, "o.jsonl")
	if err := os.WriteFile(traces, []byte(spans.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(outcomes, []byte(outs.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	ro := abOpts(traces)
	ro.outcomes, ro.Reps = outcomes, 1000
	rep, err := runAB(nil, ro, nil)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Join.Joined != n || len(rep.Diffs) != 1 {
		t.Fatalf("joined %d of %d, %d diffs", rep.Join.Joined, n, len(rep.Diffs))
	}
	d := rep.Diffs[0]
	if !d.BootByUnit || d.ScoreBoot == nil || d.DesignEffect < 4 || d.DesignEffect > 8 {
		t.Fatalf("repeated units: by unit %v, design effect %.2f (want ≈ 6), interval %v", d.BootByUnit, d.DesignEffect, d.ScoreBoot)
	}
	if d.Score == nil || d.ScoreBoot.Hi-d.ScoreBoot.Lo < 1.8*(d.Score.Hi-d.Score.Lo) {
		t.Errorf("the unit bootstrap interval %v is not wider than Welch's %v", d.ScoreBoot, d.Score)
	}
	if !strings.Contains(strings.Join(rep.Notes, "\n"), "design effect") {
		t.Errorf("no note on the repeated units: %q", rep.Notes)
	}
	t.Logf("design effect %.2f; unit bootstrap %v vs Welch %v", d.DesignEffect, d.ScoreBoot, d.Score.Interval)
}

// tuneOpts are the flag defaults of tune with the given trace files.
func tuneOpts(traces ...string) tuneOptions {
	return tuneOptions{traces: traces, Options: tuner.DefaultOptions()}
}

// abOpts are the flag defaults of ab with the given trace files.
func abOpts(traces ...string) abOptions {
	return abOptions{traces: traces, Options: abreport.DefaultOptions()}
}
