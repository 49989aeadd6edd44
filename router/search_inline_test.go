package router

import (
	"context"
	"reflect"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// TestInlineJoinProbesSameDecisions: listing the two-bridge join matches
// while the second layers are written (layer2's probe) decides exactly as
// listing them after the layers (matchJoins' own pass, kept under
// searchHooks.alt) — chain, errors, cuts, truncation — on dense graphs
// (every probe tested in the id index) and sparse ones (with the Bloom
// filters in front), across beams, fan-outs, candidate limits and budgets
// down to ones that cut a second layer short; and some decisions choose
// two or three bridges, some are cut by the budget.
func TestInlineJoinProbesSameDecisions(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	model, err := scorer.NewBayes()
	if err != nil {
		t.Fatal(err)
	}
	var compared, long, budgetCut, filtered int
	for _, gc := range []struct {
		seed uint64
		n    int
		p    float64
	}{
		{201, 28, 0.75},
		{202, 36, 0.4},
		{203, 700, 0.03}, // n ≥ filterMinRatio·beam: the filters are tested
	} {
		g := randomGraph(gc.seed, gc.n, gc.p)
		bounds := []struct{ beam, fan, k, budget int }{
			{8, 4, 4, DefaultExpansionBudget},
			{6, 2, 1, DefaultExpansionBudget},
			{10, 3, 2, 1 << 30},
		}
		// Budgets that run out anywhere in the search, the second
		// layers included (a node keeps the paths it can pay for).
		stepB := 95
		if testing.Short() || raceEnabled {
			stepB = 285
		}
		for budget := 150; budget <= 3000; budget += stepB {
			bounds = append(bounds, struct{ beam, fan, k, budget int }{8, 4 + budget%3, 4, budget})
		}
		for _, b := range bounds {
			opts := []Option{WithModel(model), WithMaxBridges(3), WithBeam(b.beam), WithFanOut(b.fan),
				WithMaxCandidates(b.k), WithExpansionBudget(b.budget), WithCacheSize(0)}
			rNew := mustNew(t, g, opts...)
			rOld := mustNew(t, g, append(opts, withSearchHooks(&searchHooks{alt: true}))...)
			step := 1
			if gc.n > 100 {
				step = 397 // about 1 200 queries per bound on the sparse graph
			}
			for i := 0; i < gc.n*gc.n; i += step {
				s, tt := i/gc.n, i%gc.n
				if s == tt {
					continue
				}
				from, to := graphidx.EntityID(s), graphidx.EntityID(tt)
				q := Query{From: g.Name(from), Value: g.Values(from)[i%len(g.Values(from))], To: g.Name(to)}
				d1, err1 := rNew.Decide(ctx, q)
				d2, err2 := rOld.Decide(ctx, q)
				if (err1 == nil) != (err2 == nil) || !reflect.DeepEqual(d1, d2) {
					t.Fatalf("graph %+v bounds %+v %v:\ninline %+v (%v)\nafter  %+v (%v)", gc, b, q, d1, err1, d2, err2)
				}
				compared++
				if d1.Chain != nil && len(d1.Chain.Bridges) >= 2 {
					long++
					if gc.n >= filterMinRatio*b.beam {
						filtered++
					}
				}
				if d1.Cut&CutBudget != 0 {
					budgetCut++
				}
			}
		}
	}
	if long == 0 || budgetCut == 0 || filtered == 0 {
		t.Fatalf("%d decisions with two or three bridges (%d with the filters), %d cut by the budget: want some of each", long, filtered, budgetCut)
	}
	t.Logf("%d decisions compared, %d with two or three bridges (%d with the filters), %d cut by the budget", compared, long, filtered, budgetCut)
}
