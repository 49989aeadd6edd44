package eval_test

import (
	"context"
	"encoding/json"
	"math"
	"testing"

	"github.com/hopwise/hopwise/internal/eval"
	"github.com/hopwise/hopwise/internal/world"
)

// smallConfig is a fast world: 30 binary variables, 30 edges, 8 held-out
// pairs, 5000 local-geometric contexts.
func smallConfig(seed int64) eval.Config {
	wc := world.EvalConfig()
	wc.Vars, wc.Edges, wc.HeldOut = 30, 30, 8
	return eval.Config{Condition: world.CondLocalGeometric, Seed: seed, World: &wc, Contexts: 5000, KeepQueries: true}
}

func TestRunSmallWorld(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	for _, seed := range []int64{3, 4} {
		r, err := eval.Run(ctx, smallConfig(seed))
		if err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		if r.Condition != world.CondLocalGeometric || r.Seed != seed {
			t.Errorf("seed %d: report labelled %q/%d", seed, r.Condition, r.Seed)
		}
		if r.Contexts != 5000 || r.Entities != 30 {
			t.Errorf("seed %d: index has %d contexts, %d entities; want 5000, 30", seed, r.Contexts, r.Entities)
		}
		// Held-out: 8 pairs × 2 directions × 2 values; supported: 30 edges × 2 × 2.
		if r.HeldOutPairs < 4 || r.HeldOutPairs > 8 || r.SupportedPairs != 30 {
			t.Errorf("seed %d: %d held-out and %d supported pairs; want 4..8 and 30", seed, r.HeldOutPairs, r.SupportedPairs)
		}
		if got := r.HeldOut.N + r.HeldOut.Skipped; got != r.HeldOutPairs*2*2 {
			t.Errorf("seed %d: held-out queries %d, want %d", seed, got, r.HeldOutPairs*4)
		}
		if got := r.Supported.N + r.Supported.Skipped; got != 30*2*2 {
			t.Errorf("seed %d: supported queries %d, want 120", seed, got)
		}
		if len(r.Queries) != r.HeldOut.N+r.Supported.N {
			t.Errorf("seed %d: kept %d queries, scored %d", seed, len(r.Queries), r.HeldOut.N+r.Supported.N)
		}
		for _, set := range []eval.Scores{r.HeldOut, r.Supported} {
			for _, e := range eval.Estimators() {
				if v := set.Get(e); math.IsNaN(v) || v < 0 || v > 1 {
					t.Errorf("seed %d: %s MSE %v outside [0, 1]", seed, e, v)
				}
			}
		}
		// The ideal scaffold of a supported pair is the edge itself, so it
		// equals the direct estimate there.
		if r.Supported.Ideal != r.Supported.Direct {
			t.Errorf("seed %d: supported ideal %v ≠ direct %v", seed, r.Supported.Ideal, r.Supported.Direct)
		}
		// Held-out pairs never co-occur, so the direct answer is the prior;
		// chaining through observed bridges must do better, and the true
		// separator path better than random bridges.
		if !(r.HeldOut.Chain < r.HeldOut.Direct) {
			t.Errorf("seed %d: held-out chain MSE %.4f not below direct %.4f", seed, r.HeldOut.Chain, r.HeldOut.Direct)
		}
		// The routed answer must beat direct by a wide margin (the
		// quality target): here by at least 4× (measured: see the log).
		t.Logf("seed %d: held-out routed %.5f, direct %.5f, ideal %.5f; supported routed %.5f, direct %.5f",
			seed, r.HeldOut.Routed, r.HeldOut.Direct, r.HeldOut.Ideal, r.Supported.Routed, r.Supported.Direct)
		if !(r.HeldOut.Routed < r.HeldOut.Direct/4) {
			t.Errorf("seed %d: held-out routed MSE %.4f not well below direct %.4f", seed, r.HeldOut.Routed, r.HeldOut.Direct)
		}
		// ... and must not lose on supported pairs (at most 1.2× direct).
		if !(r.Supported.Routed <= 1.2*r.Supported.Direct) {
			t.Errorf("seed %d: supported routed MSE %.5f above 1.2× direct %.5f", seed, r.Supported.Routed, r.Supported.Direct)
		}
		if !(r.HeldOut.Ideal < r.HeldOut.Negative) {
			t.Errorf("seed %d: held-out ideal MSE %.4f not below negative %.4f", seed, r.HeldOut.Ideal, r.HeldOut.Negative)
		}
		if r.HeldOut.ChainShare <= 0.5 {
			t.Errorf("seed %d: only %.2f of held-out queries routed to chains", seed, r.HeldOut.ChainShare)
		}
		if c := r.Calibration; c.N != len(r.Queries) || math.IsNaN(c.Spearman) || c.Spearman < -1 || c.Spearman > 1 || !(c.MeanRatio > 0) {
			t.Errorf("seed %d: calibration %+v", seed, c)
		}
		// MSE recomputed from the kept queries (definition in Scores).
		sum, n := 0.0, 0
		for i := range r.Queries {
			q := &r.Queries[i]
			if q.Set == eval.SetHeldOut {
				sum += q.SqErr(eval.EstRouted) / float64(len(q.Truth))
				n++
			}
		}
		if got := sum / float64(n); math.Abs(got-r.HeldOut.Routed) > 1e-12 {
			t.Errorf("seed %d: held-out routed %v, recomputed %v", seed, r.HeldOut.Routed, got)
		}
	}
}

func TestRunDeterministic(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	c1 := smallConfig(7)
	c1.Workers = 1
	c2 := smallConfig(7)
	c2.Workers = 3
	r1, err := eval.Run(ctx, c1)
	if err != nil {
		t.Fatal(err)
	}
	r2, err := eval.Run(ctx, c2)
	if err != nil {
		t.Fatal(err)
	}
	if r1.HeldOut != r2.HeldOut || r1.Supported != r2.Supported || r1.Calibration != r2.Calibration {
		t.Errorf("results depend on workers:\n%+v\n%+v", r1.HeldOut, r2.HeldOut)
	}
}

func TestSummaryJSONShape(t *testing.T) {
	t.Parallel()
	r, err := eval.Run(context.Background(), smallConfig(5))
	if err != nil {
		t.Fatal(err)
	}
	b, err := json.Marshal(eval.Summarize([]eval.Report{r}))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Worlds []map[string]json.RawMessage `json:"worlds"`
		Mean   []map[string]json.RawMessage `json:"mean"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.Worlds) != 1 || len(doc.Mean) != 1 {
		t.Fatalf("worlds %d, mean %d; want 1, 1", len(doc.Worlds), len(doc.Mean))
	}
	// The JSON contract: condition, seed, heldout/supported with the five
	// estimators and n, calibration with spearman and mean_ratio.
	w := doc.Worlds[0]
	for _, k := range []string{"condition", "seed", "heldout", "supported", "calibration"} {
		if _, ok := w[k]; !ok {
			t.Errorf("world lacks %q", k)
		}
	}
	for _, set := range []string{"heldout", "supported"} {
		var m map[string]float64
		if err := json.Unmarshal(w[set], &m); err != nil {
			t.Fatal(err)
		}
		for _, k := range []string{"direct", "chain", "routed", "ideal", "negative", "support_only", "n"} {
			if _, ok := m[k]; !ok {
				t.Errorf("%s lacks %q", set, k)
			}
		}
	}
	var cal map[string]float64
	if err := json.Unmarshal(w["calibration"], &cal); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"spearman", "mean_ratio"} {
		if _, ok := cal[k]; !ok {
			t.Errorf("calibration lacks %q", k)
		}
	}
}

func TestConfigErrors(t *testing.T) {
	t.Parallel()
	neg := -0.5
	for _, c := range []eval.Config{
		{Condition: "sideways"},
		{Contexts: -1},
		{Beta: &neg},
		{MaxBridges: 4},
	} {
		if _, err := eval.Run(context.Background(), c); err == nil {
			t.Errorf("Run(%+v) succeeded, want an error", c)
		}
	}
}
