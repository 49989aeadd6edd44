package scorer_test

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// benchChain builds a path 1..m+2 of entities with k values each and
// random counts (row totals up to 100·k).
func benchChain(k, m int) *memStats {
	rng := rand.New(rand.NewPCG(uint64(k), uint64(m)))
	st := newMemStats()
	for i := 1; i <= m+2; i++ {
		st.entity(graphidx.EntityID(i), k)
	}
	for e := 1; e <= m+1; e++ {
		rows := make([][]uint32, k)
		for r := range rows {
			rows[r] = make([]uint32, k)
			for v := range rows[r] {
				rows[r][v] = uint32(rng.IntN(200))
			}
		}
		st.pair(graphidx.EntityID(e), graphidx.EntityID(e+1), rows)
	}
	return st
}

func checkEstimate(b *testing.B, est scorer.Estimate, k int) {
	b.Helper()
	s := 0.0
	for _, p := range est.Dist {
		s += p
	}
	if len(est.Dist) != k || !near(s, 1, 1e-9) || !(est.Err > 0) {
		b.Fatalf("bad estimate %+v", est)
	}
}

func BenchmarkBayesDirect(b *testing.B) {
	for _, k := range []int{2, 8, 64} {
		b.Run(fmt.Sprintf("K=%d", k), func(b *testing.B) {
			st := benchChain(k, 0)
			m := mustBayes(b)
			ws := scorer.NewWorkspace()
			var est scorer.Estimate
			var err error
			b.ReportAllocs()
			for b.Loop() {
				est, err = m.Direct(ws, st, 1, 1%k, 2)
			}
			if err != nil {
				b.Fatal(err)
			}
			checkEstimate(b, est, k)
		})
	}
}

func BenchmarkBayesChain(b *testing.B) {
	for _, method := range []scorer.Variance{scorer.DeltaMethod, scorer.ExactMoments} {
		for _, c := range []struct {
			k, m   int
			borrow bool
		}{{2, 1, false}, {2, 1, true}, {2, 3, false}, {8, 3, false}, {8, 3, true}, {64, 3, false}} {
			name := fmt.Sprintf("%v/K=%d/bridges=%d", method, c.k, c.m)
			if c.borrow {
				name += "/borrow"
			}
			b.Run(name, func(b *testing.B) {
				st := benchChain(c.k, c.m)
				bridges := make([]graphidx.EntityID, c.m)
				for i := range bridges {
					bridges[i] = graphidx.EntityID(i + 2)
				}
				t := graphidx.EntityID(c.m + 2)
				m := mustBayes(b, scorer.WithVariance(method))
				ws := scorer.NewWorkspace()
				ws.BorrowDist(c.borrow)
				var est scorer.Estimate
				var err error
				b.ReportAllocs()
				for b.Loop() {
					est, err = m.Chain(ws, st, 1, 0, bridges, t)
				}
				if err != nil {
					b.Fatal(err)
				}
				checkEstimate(b, est, c.k)
			})
		}
	}
}

func BenchmarkSupportChain(b *testing.B) {
	for _, c := range []struct{ k, m int }{{1, 3}, {2, 3}} {
		b.Run(fmt.Sprintf("K=%d/bridges=%d", c.k, c.m), func(b *testing.B) {
			st := benchChain(c.k, c.m)
			m := mustSupport(b)
			ws := scorer.NewWorkspace()
			var est scorer.Estimate
			var err error
			b.ReportAllocs()
			for b.Loop() {
				est, err = m.Chain(ws, st, 1, 0, []graphidx.EntityID{2, 3, 4}, 5)
			}
			if err != nil {
				b.Fatal(err)
			}
			checkEstimate(b, est, c.k)
		})
	}
}

func BenchmarkCombine(b *testing.B) {
	ests := []scorer.Estimate{
		{Dist: []float64{0.2, 0.8}, Err: 0.01},
		{Dist: []float64{0.3, 0.7}, Err: 0.02},
		{Dist: []float64{0.25, 0.75}, Err: 0.015},
	}
	var out scorer.Estimate
	var err error
	b.ReportAllocs()
	for b.Loop() {
		out, err = scorer.Combine(ests)
	}
	if err != nil || !(out.Err < 0.01) {
		b.Fatalf("%+v %v", out, err)
	}
}

// BenchmarkStatsLookup measures the fake's Pair lookup alone, to separate
// it from the scorer's own cost in the figures above.
func BenchmarkStatsLookup(b *testing.B) {
	st := benchChain(2, 0)
	ok := false
	b.ReportAllocs()
	for b.Loop() {
		_, ok = st.Pair(1, 2)
	}
	if !ok {
		b.Fatal("missing pair")
	}
}
