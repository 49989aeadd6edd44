package router

import (
	"context"
	"reflect"
	"sync/atomic"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// withSearchHooks instruments the search (tests only).
func withSearchHooks(h *searchHooks) Option {
	return optionFunc(func(d *draft) { d.hooks = h })
}

// TestLayerPruningSameDecisions: leaving out the second-layer paths of
// first-layer nodes whose every chain is already beaten (liveNodes)
// changes no decision — chain, errors, cuts, truncation — on dense random
// graphs, across β, beams, fan-outs, candidate limits and budgets down to
// ones that cut the search; and the pruning really runs.
func TestLayerPruningSameDecisions(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	var pruned, compared, cut, budgetCut, whole, prunedLong atomic.Int64
	on := &searchHooks{layerPruned: func() { pruned.Add(1) }}
	off := &searchHooks{noLayerPruning: true}
	seeds := uint64(6)
	if testing.Short() || raceEnabled {
		seeds = 2 // about 8 000 decision pairs instead of 26 000
	}
	for _, beta := range []float64{0, scorer.DefaultBeta, 0.13} {
		model, err := scorer.NewBayes(scorer.WithBeta(beta))
		if err != nil {
			t.Fatal(err)
		}
		for seed := uint64(1); seed <= seeds; seed++ {
			n := 24 + int(seed%3)*8
			g := randomGraph(100+seed, n, []float64{0.7, 0.85, 0.95}[seed%3])
			if seed%2 == 0 {
				g.SetRankPrefix(6 + int(seed)) // some nodes' prefixes shorter than needed: no pruning for them
			}
			for _, b := range []struct{ beam, fan, k, budget int }{
				{8, 4, 4, DefaultExpansionBudget},
				{6, 2, 1, DefaultExpansionBudget},
				{10, 3, 2, 1 << 30},
				{8, 4, 4, 900},
				{8, 4, 3, 2500},
				{48, 48, 64, 1 << 30},
				{48, 48, 4, 1 << 30},
			} {
				if b.beam > 10 && seed > 1 {
					continue // whole layers cost the most; one graph per β suffices
				}
				opts := []Option{WithModel(model), WithMaxBridges(3), WithBeam(b.beam), WithFanOut(b.fan),
					WithMaxCandidates(b.k), WithExpansionBudget(b.budget), WithCacheSize(0)}
				rOn := mustNew(t, g, append(opts, withSearchHooks(on))...)
				rOff := mustNew(t, g, append(opts, withSearchHooks(off))...)
				for s := 0; s < n; s++ {
					for tt := 0; tt < n; tt++ {
						if s == tt || (s*7+tt+int(seed))%5 != 0 {
							continue
						}
						from, to := graphidx.EntityID(s), graphidx.EntityID(tt)
						q := Query{From: g.Name(from), Value: g.Values(from)[s%len(g.Values(from))], To: g.Name(to)}
						before := pruned.Load()
						d1, err1 := rOn.Decide(ctx, q)
						if pruned.Load() > before && d1.Chain != nil && len(d1.Chain.Bridges) >= 2 {
							prunedLong.Add(1)
						}
						d2, err2 := rOff.Decide(ctx, q)
						if (err1 == nil) != (err2 == nil) || !reflect.DeepEqual(d1, d2) {
							t.Fatalf("β %v seed %d bounds %+v %v:\npruned   %+v (%v)\nunpruned %+v (%v)", beta, seed, b, q, d1, err1, d2, err2)
						}
						compared.Add(1)
						switch {
						case d1.Cut&CutBudget != 0:
							budgetCut.Add(1)
						case d1.Cut != 0:
							cut.Add(1)
						default:
							whole.Add(1)
						}
					}
				}
			}
		}
	}
	if pruned.Load() == 0 {
		t.Fatal("liveNodes never pruned: the test does not exercise it")
	}
	if cut.Load() == 0 || budgetCut.Load() == 0 || whole.Load() == 0 {
		t.Fatalf("cut %d, cut by the budget %d, not cut %d: want some of each", cut.Load(), budgetCut.Load(), whole.Load())
	}
	t.Logf("%d decisions compared, %d with layer pruning (%d of them chose two or three bridges); %d cut, %d cut by the budget, %d not cut",
		compared.Load(), pruned.Load(), prunedLong.Load(), cut.Load(), budgetCut.Load(), whole.Load())
}
