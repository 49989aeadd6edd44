package scorer_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"sync"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

func TestConstructorsRejectBadOptions(t *testing.T) {
	t.Parallel()
	nan, inf := math.NaN(), math.Inf(1)
	bayes := func(o ...scorer.Option) error { _, err := scorer.NewBayes(o...); return err }
	support := func(o ...scorer.Option) error { _, err := scorer.NewSupport(o...); return err }
	for _, c := range []struct {
		name string
		err  error
	}{
		{"bayes α=0", bayes(scorer.WithAlpha(0))},
		{"bayes α<0", bayes(scorer.WithAlpha(-1))},
		{"bayes α=NaN", bayes(scorer.WithAlpha(nan))},
		{"bayes α=Inf", bayes(scorer.WithAlpha(inf))},
		{"bayes β<0", bayes(scorer.WithBeta(-1e-9))},
		{"bayes β=NaN", bayes(scorer.WithBeta(nan))},
		{"bayes β=Inf", bayes(scorer.WithBeta(inf))},
		{"bayes z<0", bayes(scorer.WithSignalZ(-0.5))},
		{"bayes z=NaN", bayes(scorer.WithSignalZ(nan))},
		{"bayes z=Inf", bayes(scorer.WithSignalZ(inf))},
		{"bayes given v0", bayes(scorer.WithV0(1))},
		{"bayes given n0", bayes(scorer.WithN0(1))},
		{"support v0=0", support(scorer.WithV0(0))},
		{"support v0=-1", support(scorer.WithV0(-1))},
		{"support v0=Inf", support(scorer.WithV0(inf))},
		{"support n0=0", support(scorer.WithN0(0))},
		{"support n0=NaN", support(scorer.WithN0(nan))},
		{"support β<0", support(scorer.WithBeta(-1))},
		{"support α=0", support(scorer.WithAlpha(0))},
		{"support given z", support(scorer.WithSignalZ(2))},
		{"bayes unknown variance", bayes(scorer.WithVariance(scorer.Variance(7)))},
		{"support given variance", support(scorer.WithVariance(scorer.ExactMoments))},
		{"later bad option wins", bayes(scorer.WithAlpha(2), scorer.WithBeta(-3))},
	} {
		if !errors.Is(c.err, scorer.ErrBadOption) {
			t.Errorf("%s: error %v, want ErrBadOption", c.name, c.err)
		}
	}
}

func TestOptionsTakeEffect(t *testing.T) {
	t.Parallel()
	b, err := scorer.NewBayes(nil, scorer.WithAlpha(0.5), scorer.WithBeta(0.02))
	if err != nil {
		t.Fatal(err)
	}
	if b.Alpha() != 0.5 || b.HopBias() != 0.02 || b.Name() != "bayes" {
		t.Errorf("alpha %g beta %g name %q", b.Alpha(), b.HopBias(), b.Name())
	}
	if b.SignalZ() != scorer.DefaultSignalZ {
		t.Errorf("default z %g", b.SignalZ())
	}
	// z enters EdgeCost as −log(V̂ − z/√n) (values in TestBayesEdgeCostHand).
	ps := graphidx.NewPairStats(1, 2, 2, 2, []uint32{40, 10, 10, 40})
	b0, _ := scorer.NewBayes(scorer.WithSignalZ(0))
	b3, _ := scorer.NewBayes(scorer.WithSignalZ(3))
	if c0, c2, c3 := b0.EdgeCost(ps), b.EdgeCost(ps), b3.EdgeCost(ps); !(0 < c0 && c0 < c2 && c2 < c3) || b0.SignalZ() != 0 {
		t.Errorf("EdgeCost with z = 0, 2, 3: %g, %g, %g; want increasing in z", c0, c2, c3)
	}
	if e, _ := scorer.NewBayes(scorer.WithVariance(scorer.ExactMoments)); e.Variance() != scorer.ExactMoments || e.Variance().String() != "exact" {
		t.Errorf("WithVariance(ExactMoments) not applied: %v", e.Variance())
	}
	d, _ := scorer.NewBayes()
	if d.Variance() != scorer.DeltaMethod || d.Alpha() != scorer.DefaultAlpha || d.HopBias() != scorer.DefaultBeta {
		t.Errorf("defaults alpha %g beta %g", d.Alpha(), d.HopBias())
	}
	// The support model's EdgeCost decreases with support.
	sm := mustSupport(t)
	prev := math.Inf(1)
	for _, s := range []uint32{0, 1, 5, 100, 1 << 30} {
		c := sm.EdgeCost(graphidx.NewPairStats(1, 2, 1, 1, []uint32{s}))
		if !(c < prev) || c <= 0 {
			t.Errorf("support: EdgeCost at support %d = %g not decreasing/positive", s, c)
		}
		prev = c
	}
}

func mustSupport(t testing.TB, opts ...scorer.Option) *scorer.Support {
	t.Helper()
	m, err := scorer.NewSupport(opts...)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// badStats returns a PairStats of the wrong shape.
type badStats struct{ *memStats }

func (b badStats) Pair(a, c graphidx.EntityID) (graphidx.PairStats, bool) {
	return graphidx.NewPairStats(a, c, 3, 3, make([]uint32, 9)), true
}

func TestBadInputErrors(t *testing.T) {
	t.Parallel()
	st := newMemStats().entity(1, 2).entity(2, 2).entity(3, 2).entity(4, 65).
		pair(1, 2, [][]uint32{{3, 4}, {5, 6}})
	bad := badStats{st}
	models := []scorer.Model{mustBayes(t), mustSupport(t)}
	for _, m := range models {
		ws := scorer.NewWorkspace()
		for _, c := range []struct {
			name    string
			st      scorer.Stats
			s       graphidx.EntityID
			u       int
			bridges []graphidx.EntityID
			t       graphidx.EntityID
			want    error
		}{
			{"unknown target", st, 1, 0, nil, 99, scorer.ErrUnknownEntity},
			{"unknown observed", st, 99, 0, nil, 1, scorer.ErrUnknownEntity},
			{"unknown bridge", st, 1, 0, []graphidx.EntityID{99}, 2, scorer.ErrUnknownEntity},
			{"u negative", st, 1, -1, nil, 2, scorer.ErrValueRange},
			{"u = K", st, 1, 2, nil, 2, scorer.ErrValueRange},
			{"s = t", st, 1, 0, nil, 1, scorer.ErrBadPath},
			{"bridge = s", st, 1, 0, []graphidx.EntityID{1}, 2, scorer.ErrBadPath},
			{"bridge = t", st, 1, 0, []graphidx.EntityID{2}, 2, scorer.ErrBadPath},
			{"repeated bridge", st, 1, 0, []graphidx.EntityID{3, 3}, 2, scorer.ErrBadPath},
			{"K above limit", st, 1, 0, nil, 4, scorer.ErrBadStats},
			{"pair of wrong shape", bad, 1, 0, nil, 2, scorer.ErrBadStats},
			{"nil stats", nil, 1, 0, nil, 2, scorer.ErrBadStats},
		} {
			_, err := m.Chain(ws, c.st, c.s, c.u, c.bridges, c.t)
			if !errors.Is(err, c.want) {
				t.Errorf("%s Chain %s: error %v, want %v", m.Name(), c.name, err, c.want)
			}
			if c.bridges == nil {
				_, err := m.Direct(ws, c.st, c.s, c.u, c.t)
				if !errors.Is(err, c.want) {
					t.Errorf("%s Direct %s: error %v, want %v", m.Name(), c.name, err, c.want)
				}
			}
		}
		// The workspace is still usable after errors.
		if _, err := m.Chain(ws, st, 1, 1, nil, 2); err != nil {
			t.Errorf("%s: workspace unusable after errors: %v", m.Name(), err)
		}
	}
}

// randomStats builds a fully connected random world of n entities with
// random K in [1, kmax] and row totals in [0, nmax].
func randomStats(seed uint64, n, kmax, nmax int) *memStats {
	rng := rand.New(rand.NewPCG(seed, 7))
	st := newMemStats()
	for i := 1; i <= n; i++ {
		st.entity(graphidx.EntityID(i), 1+rng.IntN(kmax))
	}
	for a := 1; a <= n; a++ {
		for b := a + 1; b <= n; b++ {
			if rng.IntN(5) == 0 {
				continue // some pairs never observed
			}
			ka, kb := st.NumValues(graphidx.EntityID(a)), st.NumValues(graphidx.EntityID(b))
			rows := make([][]uint32, ka)
			for r := range rows {
				rows[r] = make([]uint32, kb)
				for v := range rows[r] {
					rows[r][v] = uint32(rng.IntN(nmax + 1))
				}
			}
			st.pair(graphidx.EntityID(a), graphidx.EntityID(b), rows)
		}
	}
	return st
}

func TestChainWithoutBridgesEqualsDirect(t *testing.T) {
	t.Parallel()
	st := randomStats(3, 8, 6, 40)
	b := mustBayes(t)
	ws := scorer.NewWorkspace()
	for s := graphidx.EntityID(1); s <= 8; s++ {
		for tg := graphidx.EntityID(1); tg <= 8; tg++ {
			if s == tg {
				continue
			}
			for u := 0; u < st.NumValues(s); u++ {
				d, err1 := b.Direct(ws, st, s, u, tg)
				c, err2 := b.Chain(ws, st, s, u, nil, tg)
				if err1 != nil || err2 != nil {
					t.Fatal(err1, err2)
				}
				if !near(d.Err, c.Err, 1e-15) || d.Support != c.Support {
					t.Errorf("%d=%d→%d: direct %+v chain %+v", s, u, tg, d, c)
				}
				for v := range d.Dist {
					if !near(d.Dist[v], c.Dist[v], 1e-15) {
						t.Errorf("%d=%d→%d: Dist differ %v %v", s, u, tg, d.Dist, c.Dist)
					}
				}
			}
		}
	}
}

func TestChainUnobservedEdgeUsesPrior(t *testing.T) {
	t.Parallel()
	st := newMemStats().entity(1, 2).entity(2, 3).entity(3, 2).
		pair(1, 2, [][]uint32{{50, 30, 20}, {10, 10, 80}})
	// 2–3 never observed: M_2 is the prior, every row uniform.
	b := mustBayes(t, scorer.WithBeta(0.01), scorer.WithMissingSignal(2, 0.1), scorer.WithHopAlpha(0.5))
	est, err := b.Chain(nil, st, 1, 0, []graphidx.EntityID{2}, 3)
	if err != nil {
		t.Fatal(err)
	}
	if est.Support != 0 {
		t.Errorf("support %d, want 0 for an unobserved edge", est.Support)
	}
	for v, p := range est.Dist {
		if !near(p, 0.5, 1e-15) {
			t.Errorf("Dist[%d] = %g, want 0.5 through a uniform prior edge", v, p)
		}
	}
	// Hand derivation (hop prior Dirichlet(1/2)): rows of M_2 are
	// Dirichlet(1/2, 1/2) with Var = (1/4)/(1·2) = 1/8 per value; p̂_v =
	// Σ_r x[r] M2[r,v] with x = θ̂ of row 0 of edge 1, (N + 1/2)/(100 + 3/2),
	// so Var(p̂_v) = Σ_r x[r]²/8 from edge 2; edge 1 adds nothing because
	// every column of R_1 = M_2 (means) is constant (0.5). Err = 2·Σ x²/8 +
	// β + γδ²: the unobserved edge has signal 0, so the missing-signal term
	// is γ·(δ − 0)² = 2·0.1².
	x := []float64{50.5 / 101.5, 30.5 / 101.5, 20.5 / 101.5}
	want := 0.01 + 2*0.1*0.1
	for _, xi := range x {
		want += 2 * xi * xi / 8
	}
	if !near(est.Err, want, 1e-15) {
		t.Errorf("Err %.17g, hand derivation %.17g", est.Err, want)
	}
}

func TestChainSupportIsMinimumEdge(t *testing.T) {
	t.Parallel()
	st := newMemStats().entity(1, 2).entity(2, 2).entity(3, 2).entity(4, 2).
		pair(1, 2, [][]uint32{{10, 10}, {10, 10}}). // 40
		pair(2, 3, [][]uint32{{3, 4}, {5, 6}}).     // 18
		pair(3, 4, [][]uint32{{100, 0}, {0, 100}})  // 200
	for _, m := range []scorer.Model{mustBayes(t), mustSupport(t)} {
		est, err := m.Chain(nil, st, 1, 0, []graphidx.EntityID{2, 3}, 4)
		if err != nil {
			t.Fatal(err)
		}
		if est.Support != 18 {
			t.Errorf("%s: support %d, want 18", m.Name(), est.Support)
		}
		d, _ := m.Direct(nil, st, 1, 0, 2)
		if d.Support != 40 {
			t.Errorf("%s: direct support %d, want 40", m.Name(), d.Support)
		}
	}
}

func TestSupportModelFormula(t *testing.T) {
	t.Parallel()
	// Presence-only entities (K = 1), supports 8 (1–2), 18 (2–3), 0 (1–3).
	st := newMemStats().entity(1, 1).entity(2, 1).entity(3, 1).
		pair(1, 2, [][]uint32{{8}}).pair(2, 3, [][]uint32{{18}})
	m := mustSupport(t, scorer.WithV0(0.5), scorer.WithN0(2), scorer.WithBeta(0.01))
	// Expected values by hand from the support model (docs/DESIGN.md, Error model): err(edge) = v0/(support+n0).
	for _, c := range []struct {
		name    string
		s       graphidx.EntityID
		bridges []graphidx.EntityID
		t       graphidx.EntityID
		err     float64
		support uint64
	}{
		{"direct 1→2", 1, nil, 2, 0.5 / 10, 8},
		{"direct 2→3", 2, nil, 3, 0.5 / 20, 18},
		{"direct unseen 1→3", 1, nil, 3, 0.5 / 2, 0},
		{"chain 1→2→3", 1, []graphidx.EntityID{2}, 3, 0.5/10 + 0.5/20 + 0.01, 8},
		{"chain 3→2→1", 3, []graphidx.EntityID{2}, 1, 0.5/20 + 0.5/10 + 0.01, 8},
		{"chain 2→1→3 (unseen edge)", 2, []graphidx.EntityID{1}, 3, 0.5/10 + 0.5/2 + 0.01, 0},
	} {
		est, err := m.Chain(nil, st, c.s, 0, c.bridges, c.t)
		if err != nil {
			t.Fatal(err)
		}
		if !near(est.Err, c.err, 1e-15) || est.Support != c.support {
			t.Errorf("%s: Err %.17g support %d, want %.17g and %d", c.name, est.Err, est.Support, c.err, c.support)
		}
		if len(est.Dist) != 1 || est.Dist[0] != 1 {
			t.Errorf("%s: Dist %v, want [1] for a presence-only target", c.name, est.Dist)
		}
		if c.bridges == nil {
			d, err := m.Direct(nil, st, c.s, 0, c.t)
			if err != nil || d.Err != est.Err {
				t.Errorf("%s: Direct %v %v differs from Chain without bridges", c.name, d, err)
			}
		}
	}
	if got := m.EdgeCost(graphidx.NewPairStats(1, 2, 1, 1, []uint32{8})); got != 0.05 {
		t.Errorf("EdgeCost at support 8 = %g, want 0.05", got)
	}
	if m.HopBias() != 0.01 || m.Name() != "support" {
		t.Errorf("HopBias %g Name %q", m.HopBias(), m.Name())
	}
}

// TestSupportDistMatchesBayes: the support model reports the same point
// estimate as the Bayes model; only the error differs.
func TestSupportDistMatchesBayes(t *testing.T) {
	t.Parallel()
	st := randomStats(11, 6, 5, 30)
	// The support model smooths with α everywhere; the Bayes model's hops
	// use their own prior, set to the same α here.
	b, s := mustBayes(t, scorer.WithHopAlpha(scorer.DefaultAlpha)), mustSupport(t)
	for _, path := range [][]graphidx.EntityID{{1, 2}, {1, 2, 3}, {4, 1, 6, 2}, {6, 5, 4, 3, 2}} {
		be, err1 := b.Chain(nil, st, path[0], 0, path[1:len(path)-1], path[len(path)-1])
		se, err2 := s.Chain(nil, st, path[0], 0, path[1:len(path)-1], path[len(path)-1])
		if err1 != nil || err2 != nil {
			t.Fatal(err1, err2)
		}
		for v := range be.Dist {
			if !near(be.Dist[v], se.Dist[v], 1e-14) {
				t.Errorf("path %v: bayes %v support %v", path, be.Dist, se.Dist)
			}
		}
	}
}

func TestCombine(t *testing.T) {
	t.Parallel()
	a := scorer.Estimate{Dist: []float64{0.9, 0.1}, Err: 0.01, Support: 10}
	b := scorer.Estimate{Dist: []float64{0.4, 0.6}, Err: 0.04, Support: 5}
	got, err := scorer.Combine([]scorer.Estimate{a, b})
	if err != nil {
		t.Fatal(err)
	}
	// Inverse-variance weights 100 : 25 = 0.8 : 0.2 (hand computed).
	if !near(got.Dist[0], 0.8, 1e-15) || !near(got.Dist[1], 0.2, 1e-15) {
		t.Errorf("Dist %v, want [0.8 0.2]", got.Dist)
	}
	if !near(got.Err, 1.0/125, 1e-18) || got.Err >= a.Err {
		t.Errorf("Err %g, want 1/125 < %g", got.Err, a.Err)
	}
	if got.Support != 15 {
		t.Errorf("Support %d, want 15", got.Support)
	}
	// Combining n equal-error estimates divides Err by n.
	eq, _ := scorer.Combine([]scorer.Estimate{a, a, a, a})
	if !near(eq.Err, a.Err/4, 1e-18) {
		t.Errorf("four equal estimates: Err %g, want %g", eq.Err, a.Err/4)
	}
	// Err = 0 guard: exact estimates dominate.
	z := scorer.Estimate{Dist: []float64{0.3, 0.7}, Err: 0}
	gz, err := scorer.Combine([]scorer.Estimate{a, z, b})
	if err != nil || gz.Err != 0 || gz.Dist[0] != 0.3 {
		t.Errorf("zero-error combine: %+v %v", gz, err)
	}
	// Inf errors get weight 0.
	inf := scorer.Estimate{Dist: []float64{0, 1}, Err: math.Inf(1)}
	gi, err := scorer.Combine([]scorer.Estimate{inf, a})
	if err != nil || gi.Err != a.Err || gi.Dist[0] != 0.9 {
		t.Errorf("inf-error combine: %+v %v", gi, err)
	}
	// A single estimate comes back with a copied Dist.
	one, _ := scorer.Combine([]scorer.Estimate{a})
	one.Dist[0] = -1
	if a.Dist[0] != 0.9 {
		t.Error("Combine aliased its input Dist")
	}
	for _, c := range []struct {
		name string
		in   []scorer.Estimate
		want error
	}{
		{"empty", nil, scorer.ErrNoEstimates},
		{"NaN err", []scorer.Estimate{a, {Dist: []float64{1, 0}, Err: math.NaN()}}, scorer.ErrBadEstimate},
		{"negative err", []scorer.Estimate{{Dist: []float64{1, 0}, Err: -1}}, scorer.ErrBadEstimate},
		{"length mismatch", []scorer.Estimate{a, {Dist: []float64{1}, Err: 1}}, scorer.ErrBadEstimate},
		{"empty dist", []scorer.Estimate{{Err: 1}}, scorer.ErrBadEstimate},
	} {
		if _, err := scorer.Combine(c.in); !errors.Is(err, c.want) {
			t.Errorf("%s: error %v, want %v", c.name, err, c.want)
		}
	}
}

// TestCombineChainsLowersErr combines two real, edge-disjoint chains.
func TestCombineChainsLowersErr(t *testing.T) {
	t.Parallel()
	st := randomStats(5, 6, 3, 50)
	b := mustBayes(t)
	c1, err1 := b.Chain(nil, st, 1, 0, []graphidx.EntityID{2}, 6)
	c2, err2 := b.Chain(nil, st, 1, 0, []graphidx.EntityID{3, 4}, 6)
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	got, err := scorer.Combine([]scorer.Estimate{c1, c2})
	if err != nil {
		t.Fatal(err)
	}
	if !(got.Err < min(c1.Err, c2.Err)) {
		t.Errorf("combined Err %g not below %g and %g", got.Err, c1.Err, c2.Err)
	}
	s := 0.0
	for _, p := range got.Dist {
		s += p
	}
	if !near(s, 1, 1e-12) {
		t.Errorf("combined Dist sums to %g", s)
	}
}

// TestConcurrentUse: one model, one workspace per goroutine, results equal
// to serial ones (run with -race).
func TestConcurrentUse(t *testing.T) {
	t.Parallel()
	st := randomStats(9, 7, 4, 30)
	b := mustBayes(t)
	paths := [][]graphidx.EntityID{{1, 2}, {1, 2, 3}, {7, 1, 5, 2}, {2, 3, 4, 5, 6}}
	want := make([]scorer.Estimate, len(paths))
	for i, p := range paths {
		var err error
		want[i], err = b.Chain(nil, st, p[0], 0, p[1:len(p)-1], p[len(p)-1])
		if err != nil {
			t.Fatal(err)
		}
	}
	var wg sync.WaitGroup
	errs := make(chan string, 8)
	for g := 0; g < 8; g++ {
		wg.Go(func() {
			ws := scorer.NewWorkspace()
			for it := 0; it < 200; it++ {
				i := (g + it) % len(paths)
				p := paths[i]
				got, err := b.Chain(ws, st, p[0], 0, p[1:len(p)-1], p[len(p)-1])
				if err != nil || got.Err != want[i].Err || got.Dist[0] != want[i].Dist[0] {
					errs <- "mismatch under concurrency"
					return
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for e := range errs {
		t.Error(e)
	}
}

// FuzzBayesChain: arbitrary counts and paths never panic; Err is finite and
// non-negative, Dist is a probability vector.
func FuzzBayesChain(f *testing.F) {
	f.Add([]byte{2, 2, 2, 10, 20, 30, 40, 1, 2, 3, 4}, uint8(0), 1.0)
	f.Add([]byte{3, 1, 4, 255, 0, 0, 7, 9, 200, 1}, uint8(2), 0.3)
	f.Add([]byte{64, 64}, uint8(63), 1e-6)
	f.Add([]byte{1, 1, 1, 1, 1}, uint8(0), 50.0)
	f.Add([]byte{}, uint8(0), 1.0)
	f.Fuzz(func(t *testing.T, data []byte, u uint8, alpha float64) {
		b, err := scorer.NewBayes(scorer.WithAlpha(alpha))
		if err != nil {
			if !errors.Is(err, scorer.ErrBadOption) {
				t.Fatalf("unexpected error %v", err)
			}
			return
		}
		// Path length and K from the first bytes, counts from the rest.
		n := 2 + len(data)%4
		st := newMemStats()
		next := func(i int) byte {
			if len(data) == 0 {
				return 1
			}
			return data[i%len(data)]
		}
		for i := 0; i < n; i++ {
			st.entity(graphidx.EntityID(i+1), 1+int(next(i))%graphidx.MaxValues)
		}
		pos := n
		for e := 0; e+1 < n; e++ {
			ka, kb := st.NumValues(graphidx.EntityID(e+1)), st.NumValues(graphidx.EntityID(e+2))
			rows := make([][]uint32, ka)
			for r := range rows {
				rows[r] = make([]uint32, kb)
				for v := range rows[r] {
					rows[r][v] = uint32(next(pos)) * uint32(next(pos+1))
					pos += 2
				}
			}
			if next(pos)%7 != 0 {
				st.pair(graphidx.EntityID(e+1), graphidx.EntityID(e+2), rows)
			}
			pos++
		}
		path := make([]graphidx.EntityID, n)
		for i := range path {
			path[i] = graphidx.EntityID(i + 1)
		}
		est, err := b.Chain(nil, st, path[0], int(u), path[1:n-1], path[n-1])
		if int(u) >= st.NumValues(1) {
			if !errors.Is(err, scorer.ErrValueRange) {
				t.Fatalf("u=%d K=%d: error %v, want ErrValueRange", u, st.NumValues(1), err)
			}
			return
		}
		if err != nil {
			t.Fatal(err)
		}
		if math.IsNaN(est.Err) || math.IsInf(est.Err, 0) || est.Err < 0 {
			t.Fatalf("Err %v", est.Err)
		}
		s := 0.0
		for _, p := range est.Dist {
			if p < 0 || p > 1+1e-12 || math.IsNaN(p) {
				t.Fatalf("Dist %v", est.Dist)
			}
			s += p
		}
		if !near(s, 1, 1e-9) {
			t.Fatalf("Dist sums to %g", s)
		}
		// ExactMoments: same Dist, and a variance never below the delta
		// method's (the delta value is a lower bound, see Variance).
		bx, _ := scorer.NewBayes(scorer.WithAlpha(alpha), scorer.WithVariance(scorer.ExactMoments))
		ex, err := bx.Chain(nil, st, path[0], int(u), path[1:n-1], path[n-1])
		if err != nil {
			t.Fatal(err)
		}
		for v := range ex.Dist {
			if !near(ex.Dist[v], est.Dist[v], 1e-12) {
				t.Fatalf("exact Dist %v, delta Dist %v", ex.Dist, est.Dist)
			}
		}
		if math.IsNaN(ex.Err) || ex.Err < est.Err*(1-1e-9)-1e-15 {
			t.Fatalf("exact Err %.17g below delta Err %.17g", ex.Err, est.Err)
		}
	})
}
