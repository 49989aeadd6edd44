package scorer_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// mixedChain builds a path 1..len(ks) whose node i has ks[i-1] values and
// random counts on every edge except the ones listed in missing (edge e
// joins e and e+1), which are never observed.
func mixedChain(seed uint64, ks []int, missing ...int) *memStats {
	rng := rand.New(rand.NewPCG(seed, uint64(len(ks))))
	st := newMemStats()
	for i, k := range ks {
		st.entity(graphidx.EntityID(i+1), k)
	}
	skip := map[int]bool{}
	for _, e := range missing {
		skip[e] = true
	}
	for e := 1; e < len(ks); e++ {
		if skip[e] {
			continue
		}
		rows := make([][]uint32, ks[e-1])
		for r := range rows {
			rows[r] = make([]uint32, ks[e])
			for v := range rows[r] {
				rows[r][v] = uint32(rng.IntN(60))
			}
		}
		st.pair(graphidx.EntityID(e), graphidx.EntityID(e+1), rows)
	}
	return st
}

// sameBits reports whether a and b hold the same float64 bit patterns.
func sameBits(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

// TestBorrowDistSameBits checks that a workspace with BorrowDist(true)
// gives every built-in model the same estimates, bit for bit, as fresh
// workspaces that allocate Dist, over paths of mixed K (including K above
// the narrow-product limit and never-observed edges), and that the
// borrowed Dist is overwritten by the next call (the documented contract)
// while an owned Dist is not.
func TestBorrowDistSameBits(t *testing.T) {
	t.Parallel()
	models := []struct {
		name string
		m    scorer.Model
	}{
		{"bayes-delta", mustBayes(t)},
		{"bayes-exact", mustBayes(t, scorer.WithVariance(scorer.ExactMoments))},
		{"support", mustSupport(t)},
	}
	paths := []struct {
		ks      []int
		missing []int
	}{
		{[]int{2, 2}, nil},
		{[]int{3, 1}, nil},
		{[]int{2, 5, 3}, nil},
		{[]int{4, 20, 2, 7}, nil},
		{[]int{20, 3, 24, 5, 2}, []int{2}},
		{[]int{2, 2, 2}, []int{1, 2}},
	}
	for _, md := range models {
		borrowed := scorer.NewWorkspace()
		borrowed.BorrowDist(true)
		if !borrowed.BorrowsDist() || scorer.NewWorkspace().BorrowsDist() {
			t.Fatal("BorrowsDist does not report the setting")
		}
		for pi, p := range paths {
			st := mixedChain(uint64(pi), p.ks, p.missing...)
			n := len(p.ks)
			s, tt := graphidx.EntityID(1), graphidx.EntityID(n)
			bridges := make([]graphidx.EntityID, 0, n-2)
			for i := 2; i < n; i++ {
				bridges = append(bridges, graphidx.EntityID(i))
			}
			for u := 0; u < p.ks[0]; u++ {
				name := fmt.Sprintf("%s/path%d/u=%d", md.name, pi, u)
				want, err := md.m.Chain(nil, st, s, u, bridges, tt)
				if err != nil {
					t.Fatalf("%s: %v", name, err)
				}
				keep := append([]float64(nil), want.Dist...)
				got, err := md.m.Chain(borrowed, st, s, u, bridges, tt)
				if err != nil {
					t.Fatalf("%s: %v", name, err)
				}
				if !sameBits(got.Dist, want.Dist) || math.Float64bits(got.Err) != math.Float64bits(want.Err) || got.Support != want.Support {
					t.Errorf("%s: borrowed chain %+v, owned %+v", name, got, want)
				}
				if cap(got.Dist) != len(got.Dist) {
					t.Errorf("%s: borrowed Dist has spare capacity %d > %d", name, cap(got.Dist), len(got.Dist))
				}
				wd, err := md.m.Direct(nil, st, s, u, tt)
				if err != nil {
					t.Fatalf("%s: %v", name, err)
				}
				gd, err := md.m.Direct(borrowed, st, s, u, tt)
				if err != nil {
					t.Fatalf("%s: %v", name, err)
				}
				if !sameBits(gd.Dist, wd.Dist) || math.Float64bits(gd.Err) != math.Float64bits(wd.Err) || gd.Support != wd.Support {
					t.Errorf("%s: borrowed direct %+v, owned %+v", name, gd, wd)
				}
				// The owned estimate survives later calls.
				if !sameBits(want.Dist, keep) {
					t.Errorf("%s: owned Dist changed by a later call: %v, was %v", name, want.Dist, keep)
				}
				// The borrowed chain Dist and the direct one share the buffer:
				// the direct call overwrote it (both start at the same address).
				if len(got.Dist) > 0 && len(gd.Dist) > 0 && &got.Dist[0] != &gd.Dist[0] {
					t.Errorf("%s: borrowed Dists do not share the workspace buffer", name)
				}
			}
		}
	}
}

// TestBorrowDistNoAlloc checks that with BorrowDist(true) a warm workspace
// makes Direct and Chain allocation-free for both built-in models, and that
// without it each call allocates exactly its Dist.
func TestBorrowDistNoAlloc(t *testing.T) {
	// Not parallel: testing.AllocsPerRun counts every goroutine's mallocs.
	st := mixedChain(7, []int{3, 8, 20, 4})
	bridges := []graphidx.EntityID{2, 3}
	for _, m := range []scorer.Model{mustBayes(t), mustBayes(t, scorer.WithVariance(scorer.ExactMoments)), mustSupport(t)} {
		for _, borrow := range []bool{true, false} {
			ws := scorer.NewWorkspace()
			ws.BorrowDist(borrow)
			var err error
			call := func() {
				if _, e := m.Chain(ws, st, 1, 2, bridges, 4); e != nil {
					err = e
				}
				if _, e := m.Direct(ws, st, 1, 2, 4); e != nil {
					err = e
				}
			}
			call() // grow the buffers
			got := testing.AllocsPerRun(50, call)
			if err != nil {
				t.Fatal(err)
			}
			want := 2.0
			if borrow {
				want = 0
			}
			if got != want {
				t.Errorf("%s borrow=%v: %v allocations per Chain+Direct, want %v", m.Name(), borrow, got, want)
			}
		}
	}
}
