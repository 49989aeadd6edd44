package eval_test

import (
	"context"
	"math"
	"testing"

	"github.com/hopwise/hopwise/internal/eval"
	"github.com/hopwise/hopwise/internal/stress"
	"github.com/hopwise/hopwise/internal/world"
)

// multiValuedConfigs are the generated multi-valued networks of the
// calibration figures in docs/QUALITY.md (section 8).
var multiValuedConfigs = []struct {
	name string
	cfg  world.Config
}{
	{"K=3", world.Config{Vars: 40, Edges: 60, Values: 3, MaxParents: 3, CPTAlpha: 0.5, CPTBeta: 0.5, HeldOut: 40}},
	{"K=4", world.Config{Vars: 60, Edges: 70, Values: 4, MaxParents: 4, CPTAlpha: 1, CPTBeta: 1, HeldOut: 40}},
}

// TestMultiValuedOracle measures how far single realised errors can be
// ranked at all on the multi-valued networks, as TestPublishedOracle does on
// the published ones: for each network (seeds 1–3 and 6–8) 20 corpora
// (corpus seeds 1–20, 50 000 contexts), and per corpus the Spearman ρ of
// the model's predicted errors and of an oracle — each query's realised
// error averaged over the other corpora (leave-one-out), an estimate of its
// expected squared error — against the realised errors. The model may not
// beat the oracle by more than 0.05 (it cannot read the noise of its own
// corpus). A measurement of about 4 minutes: HOPWISE_STRESS=1 only.
func TestMultiValuedOracle(t *testing.T) {
	stress.Require(t, "TestMultiValuedOracle builds 240 worlds")
	const corpora = 20
	for _, c := range multiValuedConfigs {
		for _, seeds := range [][]int64{{1, 2, 3}, {6, 7, 8}} {
			var model, oracle float64
			for _, seed := range seeds {
				net, err := world.Generate(c.cfg, seed)
				if err != nil {
					t.Fatal(err)
				}
				runs := make([][]eval.QueryResult, corpora)
				for i := range runs {
					r, err := eval.Run(context.Background(), eval.Config{
						Condition: world.CondLocalGeometric, Seed: int64(i + 1), Network: net, KeepQueries: true,
					})
					if err != nil {
						t.Fatal(err)
					}
					runs[i] = r.Queries
				}
				m, o := oracleSpearman(runs)
				model += m / float64(len(seeds))
				oracle += o / float64(len(seeds))
			}
			t.Logf("%s, networks %v: Spearman ρ over %d corpora each: model %.3f, oracle of the expected squared error %.3f", c.name, seeds, corpora, model, oracle)
			if math.IsNaN(model) || math.IsNaN(oracle) {
				t.Fatalf("%s: ρ model %v, oracle %v", c.name, model, oracle)
			}
			if model > oracle+0.05 {
				t.Errorf("%s %v: model ρ %.3f above the oracle's %.3f by more than 0.05", c.name, seeds, model, oracle)
			}
		}
	}
}

// oracleSpearman returns the mean over corpora of the Spearman ρ of the
// model's predicted errors (Decision.Err) and of the leave-one-out oracle
// against the realised errors, runs[i] holding the answered queries of
// corpus i over one network. The oracle of a query is its realised error
// averaged over the other corpora that asked it (at least half of them;
// others are left out of that corpus's ρ). O(corpora² · queries).
func oracleSpearman(runs [][]eval.QueryResult) (model, oracle float64) {
	type key struct {
		set             string
		from, to, value int
	}
	real := map[key][]float64{} // realised error per corpus, NaN when not asked
	for i, qs := range runs {
		for _, q := range qs {
			k := key{q.Set, q.From, q.To, q.Value}
			if real[k] == nil {
				real[k] = make([]float64, len(runs))
				for j := range real[k] {
					real[k][j] = math.NaN()
				}
			}
			real[k][i] = q.SqErr(eval.EstRouted)
		}
	}
	for i, qs := range runs {
		var pred, orc, got []float64
		for _, q := range qs {
			sum, cnt := 0.0, 0
			for j, x := range real[key{q.Set, q.From, q.To, q.Value}] {
				if j != i && !math.IsNaN(x) {
					sum += x
					cnt++
				}
			}
			if 2*cnt < len(runs) {
				continue
			}
			pred = append(pred, q.RoutedErr)
			orc = append(orc, sum/float64(cnt))
			got = append(got, q.SqErr(eval.EstRouted))
		}
		model += eval.Spearman(pred, got) / float64(len(runs))
		oracle += eval.Spearman(orc, got) / float64(len(runs))
	}
	return model, oracle
}
