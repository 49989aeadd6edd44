package demo

import (
	"bytes"
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/internal/eval"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
)

// TestRunSmall runs the whole demo on a small corpus and checks that the
// table it prints shows chained estimates beating direct ones on far-apart
// pairs, that the files exist, and that the trace file holds one decision
// span per routed query.
func TestRunSmall(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	var log bytes.Buffer
	events := 0
	progress := func(size int64) (func(graphidx.ProgressEvent), func()) {
		if size <= 0 {
			t.Errorf("progress started with corpus size %d", size)
		}
		return func(graphidx.ProgressEvent) { events++ }, func() {}
	}
	rep, err := Run(context.Background(), Config{Dir: dir, Seed: 3, Contexts: 20_000, Progress: progress, Log: &log})
	if err != nil {
		t.Fatal(err)
	}
	if events == 0 {
		t.Error("no build progress events")
	}
	var table bytes.Buffer
	if err := rep.WriteTable(&table); err != nil {
		t.Fatal(err)
	}
	if err := rep.WriteFiles(&table); err != nil {
		t.Fatal(err)
	}
	if err := rep.WriteNext(&table, "hopwise"); err != nil {
		t.Fatal(err)
	}
	t.Logf("\n%s%s", log.String(), table.String())

	h, s := rep.Eval.HeldOut, rep.Eval.Supported
	if h.N == 0 || s.N == 0 {
		t.Fatalf("empty query sets: %+v %+v", h, s)
	}
	// The point of the product: on pairs never seen together, chaining
	// beats answering directly, and the router captures that.
	if !(h.Chain < h.Direct) {
		t.Errorf("held-out: chained MSE %.5f not below direct %.5f", h.Chain, h.Direct)
	}
	if !(h.Routed < h.Direct) {
		t.Errorf("held-out: routed MSE %.5f not below direct %.5f", h.Routed, h.Direct)
	}
	if h.ChainShare < 0.5 {
		t.Errorf("held-out: only %.0f%% routed to a chain", 100*h.ChainShare)
	}
	// On supported pairs the router must mostly keep the direct answer:
	// always chaining there is far worse than routing.
	if !(s.Routed < s.Chain/4) || s.ChainShare > 0.25 {
		t.Errorf("supported: routed MSE %.6f vs chained %.6f, %.0f%% chained", s.Routed, s.Chain, 100*s.ChainShare)
	}
	// The traced pass routes the harness's queries with the same router
	// settings, so its counts must agree with the harness's.
	for _, c := range []struct {
		name string
		sc   eval.Scores
		tr   Traced
	}{{"held-out", h, rep.HeldOut}, {"supported", s, rep.Supported}} {
		if c.tr.Queries != c.sc.N {
			t.Errorf("%s: traced %d queries, eval %d", c.name, c.tr.Queries, c.sc.N)
		}
		if math.Abs(c.tr.ChainShare()-c.sc.ChainShare) > 1e-9 {
			t.Errorf("%s: traced chain share %.4f, eval %.4f", c.name, c.tr.ChainShare(), c.sc.ChainShare)
		}
	}
	// Held-out pairs never co-occur (world package contract).
	if rep.HeldOut.MeanSupport != 0 {
		t.Errorf("held-out mean support %.1f, want 0", rep.HeldOut.MeanSupport)
	}
	if len(rep.Explained) == 0 {
		t.Error("no explained decisions")
	}
	out := table.String()
	for _, want := range []string{"far-apart (held-out)", "well-supported", "chain via", "hopwise route --index"} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q", want)
		}
	}
	// Free text: one question chained, one direct, each through mentions
	// (a valued fact and a target), a decision and a plan with one step
	// per bridge.
	if len(rep.Texts) != 2 || rep.Texts[0].Decisions[0].Mode.String() != "chain" || rep.Texts[1].Decisions[0].Mode.String() != "direct" {
		t.Fatalf("texts: %+v", rep.Texts)
	}
	for _, ex := range rep.Texts {
		if len(ex.Mentions) < 2 || !ex.Mentions[0].HasValue || len(ex.Decisions) != len(ex.Plans) || len(ex.Plans) != len(ex.Prompts) {
			t.Errorf("%s: %d mentions, %d decisions, %d plans", ex.ID, len(ex.Mentions), len(ex.Decisions), len(ex.Plans))
		}
		for i, d := range ex.Decisions {
			if len(ex.Plans[i].Steps) != len(d.Bridges) || ex.Prompts[i] == "" {
				t.Errorf("%s: plan of %d steps for %d bridges", ex.ID, len(ex.Plans[i].Steps), len(d.Bridges))
			}
		}
	}
	for _, want := range []string{"From a question to a plan", "mention  \"", "chain template:", "direct template:", "--lexicon"} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q", want)
		}
	}
	for _, p := range []string{rep.Files.Corpus, rep.Files.Index, rep.Files.Queries, rep.Files.Truth, rep.Files.Trace, rep.Files.Plot, rep.Files.Lexicon, rep.Files.Questions} {
		st, err := os.Stat(p)
		if err != nil || st.Size() == 0 {
			t.Errorf("file %s missing or empty: %v", p, err)
		}
		if filepath.Dir(p) != dir {
			t.Errorf("file %s outside %s", p, dir)
		}
	}
	png, err := os.ReadFile(rep.Files.Plot)
	if err != nil || !bytes.HasPrefix(png, []byte("\x89PNG\r\n\x1a\n")) {
		t.Errorf("plot is not a PNG (%v)", err)
	}
	lg, err := otelx.ReadTraceFiles(rep.Files.Trace)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := len(lg.Decisions), rep.HeldOut.Queries+rep.Supported.Queries; got != want {
		t.Errorf("trace has %d decisions, want %d", got, want)
	}
	chains := 0
	for _, d := range lg.Decisions {
		if d.Mode == "chain" {
			chains++
		}
	}
	if want := rep.HeldOut.RoutedChain + rep.Supported.RoutedChain; chains != want {
		t.Errorf("trace has %d chain decisions, table %d", chains, want)
	}
	checkExperiment(t, rep)
}

// checkExperiment checks the experiment pass: every query asked
// ExperimentRounds times, all three arms used, exploration on, and a trace
// file in which every decision carries a propensity and joins one outcome
// in [0, 1], as tune and ab need.
func checkExperiment(t *testing.T, rep *Report) {
	t.Helper()
	ex := rep.Experiment
	if want := ExperimentRounds * (rep.HeldOut.Queries + rep.Supported.Queries); ex.Decisions != want {
		t.Errorf("experiment: %d decisions, want %d", ex.Decisions, want)
	}
	for _, a := range ExperimentArms {
		if ex.ByArm[a.Arm] == 0 {
			t.Errorf("experiment: arm %s unused: %v", a.Arm, ex.ByArm)
		}
	}
	if ex.Explored == 0 || !(ex.MeanScore > 0 && ex.MeanScore < 1) {
		t.Errorf("experiment: %d explored, mean score %v", ex.Explored, ex.MeanScore)
	}
	lg, err := otelx.ReadTraceFiles(rep.Files.Experiment)
	if err != nil {
		t.Fatal(err)
	}
	joined, st := otelx.Join(lg.Decisions, lg.Outcomes)
	if len(lg.Decisions) != ex.Decisions || st.Joined != ex.Decisions || st.DecisionsWithoutOutcome+st.OutcomesWithoutDecision+st.DecisionsWithoutKey != 0 {
		t.Errorf("experiment trace: %d decisions, join %+v; want %d joined", len(lg.Decisions), st, ex.Decisions)
	}
	for _, j := range joined {
		if !j.Decision.HasPropensity() || !(j.Outcome.Score >= 0 && j.Outcome.Score <= 1) {
			t.Fatalf("decision %+v, outcome %+v", *j.Decision, *j.Outcome)
		}
	}
}

// TestOutcome checks the outcome score (one minus half the Brier score
// against a value drawn from the exact answer) and the token prices.
func TestOutcome(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(1, 2))
	d := router.Decision{Estimate: []float64{0.8, 0.2}, Bridges: []string{"a", "b"}}
	truth := []float64{0.7, 0.3}
	var sum float64
	const n = 20000
	for range n {
		o := outcome(d, truth, rng)
		if o.InputTokens != answerInTokens+2*bridgeInTokens || o.OutputTokens != answerOutTokens+2*bridgeOutTokens {
			t.Fatalf("tokens %d in, %d out", o.InputTokens, o.OutputTokens)
		}
		sum += o.Score
	}
	// E[score] = 1 − ½(Σ(p̂ − p)² + 1 − Σp²) = 1 − ½(0.02 + 0.42) = 0.78;
	// the score takes the values 0.96 and 0.36, so its sd is 0.275 and the
	// mean of n draws has sd 0.0019.
	if mean := sum / n; math.Abs(mean-0.78) > 0.01 {
		t.Errorf("mean score %.4f, want 0.78", mean)
	}
}

func TestConfigErrors(t *testing.T) {
	t.Parallel()
	for _, c := range []Config{{Contexts: 5}, {Contexts: MaxContexts + 1}, {Workers: -1}, {Examples: 11}} {
		c.Dir = t.TempDir()
		if _, err := Run(context.Background(), c); !errors.Is(err, ErrBadConfig) {
			t.Errorf("%+v: err %v, want ErrBadConfig", c, err)
		}
	}
}
