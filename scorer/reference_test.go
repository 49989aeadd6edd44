package scorer_test

import (
	"math"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distmv"
	"gonum.org/v1/gonum/stat/distuv"
)

func mustBayes(t testing.TB, opts ...scorer.Option) *scorer.Bayes {
	t.Helper()
	b, err := scorer.NewBayes(opts...)
	if err != nil {
		t.Fatalf("NewBayes: %v", err)
	}
	return b
}

func near(got, want, tol float64) bool { return math.Abs(got-want) <= tol }

// TestBetaBDA24 checks the binary (Beta) case of the local conditional.
func TestBetaBDA24(t *testing.T) {
	t.Parallel()
	// Gelman et al., BDA 3rd ed. §2.4: 437 of 980 with a uniform prior.
	st := newMemStats().entity(1, 2).entity(2, 2).
		pair(1, 2, [][]uint32{{437, 980 - 437}, {12, 30}})
	b := mustBayes(t) // α = 1: the uniform prior
	est, err := b.Direct(nil, st, 1, 0, 2)
	if err != nil {
		t.Fatal(err)
	}
	params, err := b.Posterior(nil, st, 1, 0, 2)
	if err != nil {
		t.Fatal(err)
	}
	// BDA §2.4: posterior Beta(438, 544).
	if params[0] != 438 || params[1] != 544 {
		t.Fatalf("posterior parameters %v, want [438 544] (BDA 3rd ed. §2.4)", params)
	}
	ref := distuv.Beta{Alpha: params[0], Beta: params[1]}
	// gonum stat/distuv.Beta moments (reference library; docs/DESIGN.md, External checks).
	if !near(est.Dist[0], ref.Mean(), 1e-14) {
		t.Errorf("mean %.17g, distuv.Beta %.17g", est.Dist[0], ref.Mean())
	}
	// For K = 2, Var θ_0 = Var θ_1, so Err = 2 Var θ_0.
	if !near(est.Err/2, ref.Variance(), 1e-18) {
		t.Errorf("Var θ %.17g, distuv.Beta %.17g", est.Err/2, ref.Variance())
	}
	if est.Support != 980+42 {
		t.Errorf("support %d, want 1022", est.Support)
	}
	// BDA 3rd ed. §2.4 printed values (3 decimals): mean 0.446, sd 0.016,
	// central 95% interval [0.415, 0.477].
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"mean", est.Dist[0], 0.446},
		{"sd", math.Sqrt(est.Err / 2), 0.016},
		{"q0.025", ref.Quantile(0.025), 0.415},
		{"q0.975", ref.Quantile(0.975), 0.477},
	} {
		if !near(c.got, c.want, 0.0005) {
			t.Errorf("%s = %.5f, BDA 3rd ed. §2.4 gives %.3f", c.name, c.got, c.want)
		}
	}
}

// TestDirichletBDA34 checks the three-valued local conditional, including
// the off-diagonal covariances, against gonum's Dirichlet.
func TestDirichletBDA34(t *testing.T) {
	t.Parallel()
	// Gelman et al., BDA 3rd ed. §3.4: counts 727/583/137 with a uniform prior
	// give Dirichlet(728, 584, 138).
	st := newMemStats().entity(1, 2).entity(2, 3).entity(3, 3).
		pair(1, 2, [][]uint32{{727, 583, 137}, {5, 5, 5}})
	// A near-deterministic second edge (counts ≈ 4·10⁹) mixes the values, so
	// the chain variance exercises the full covariance of the first row.
	p2 := [][]float64{{0.7, 0.2, 0.1}, {0.1, 0.6, 0.3}, {0.25, 0.25, 0.5}}
	rows := make([][]uint32, 3)
	for r := range p2 {
		rows[r] = make([]uint32, 3)
		for v := range p2[r] {
			rows[r][v] = uint32(4e9 * p2[r][v])
		}
	}
	st.pair(2, 3, rows)
	// The chain's hop prior set to the direct estimate's uniform one, so
	// that the chain's first row is the Dirichlet of the direct estimate.
	b := mustBayes(t, scorer.WithBeta(0), scorer.WithMissingSignal(0, 0), scorer.WithHopAlpha(1))
	params, err := b.Posterior(nil, st, 1, 0, 2)
	if err != nil {
		t.Fatal(err)
	}
	for i, want := range []float64{728, 584, 138} {
		if params[i] != want {
			t.Fatalf("posterior %v, want Dirichlet(728, 584, 138) (BDA 3rd ed. §3.4)", params)
		}
	}
	// gonum stat/distmv.Dirichlet as the reference for mean and covariance.
	ref := distmv.NewDirichlet(params, nil)
	mean := ref.Mean(nil)
	var cov mat.SymDense
	ref.CovarianceMatrix(&cov)

	est, err := b.Direct(nil, st, 1, 0, 2)
	if err != nil {
		t.Fatal(err)
	}
	for v := range mean {
		if !near(est.Dist[v], mean[v], 1e-14) {
			t.Errorf("θ̂_%d = %.17g, distmv.Dirichlet %.17g", v, est.Dist[v], mean[v])
		}
	}
	if tr := mat.Trace(&cov); !near(est.Err, tr, 1e-15) {
		t.Errorf("direct Err %.17g, trace of distmv covariance %.17g", est.Err, tr)
	}

	// Chain 1→2→3: Var(p̂_v) ≈ M2[:,v]ᵀ Cov M2[:,v] (+ O(1e-10) from edge 2).
	ch, err := b.Chain(nil, st, 1, 0, []graphidx.EntityID{2}, 3)
	if err != nil {
		t.Fatal(err)
	}
	m2 := mat.NewDense(3, 3, nil)
	for r := range rows {
		n := 0.0
		for _, c := range rows[r] {
			n += float64(c)
		}
		for v, c := range rows[r] {
			m2.Set(r, v, (float64(c)+1)/(n+3))
		}
	}
	want := 0.0
	for v := 0; v < 3; v++ {
		col := mat.NewVecDense(3, mat.Col(nil, v, m2))
		want += mat.Inner(col, &cov, col)
	}
	if math.Abs(ch.Err-want) > 1e-5*want {
		t.Errorf("chain Err %.10g, Σ_v M2[:,v]ᵀ Cov_distmv M2[:,v] = %.10g", ch.Err, want)
	}
}

// TestPriorVariance checks that an unseen pair, or an observed value never
// seen with the target (n_u = 0), costs the prior variance.
//
// Derivation: Dirichlet(α,…,α) over K values has Var θ_v = α(Kα−α)/((Kα)²(Kα+1))
// (Dirichlet moments, BDA 3rd ed. §3.4 / Appendix A), so
// Σ_v Var θ_v = K·(1/K)(1−1/K)/(Kα+1) = (K−1)/(K(Kα+1)).
func TestPriorVariance(t *testing.T) {
	t.Parallel()
	for _, k := range []int{1, 2, 3, 5, 64} {
		for _, alpha := range []float64{0.25, 1, 3} {
			want := float64(k-1) / (float64(k) * (float64(k)*alpha + 1))
			b := mustBayes(t, scorer.WithAlpha(alpha), scorer.WithBeta(0), scorer.WithMissingSignal(0, 0))
			// 1–2 unobserved; 1–3 observed but never with value 0 of entity 1.
			st := newMemStats().entity(1, 2).entity(2, k).entity(3, k)
			row1 := make([]uint32, k)
			row1[0] = 40
			st.pair(1, 3, [][]uint32{make([]uint32, k), row1})
			for _, tgt := range []graphidx.EntityID{2, 3} {
				est, err := b.Direct(nil, st, 1, 0, tgt)
				if err != nil {
					t.Fatal(err)
				}
				if !near(est.Err, want, 1e-15) {
					t.Errorf("K=%d α=%g target %d: Err %.17g, prior variance %.17g", k, alpha, tgt, est.Err, want)
				}
				for v, p := range est.Dist {
					if !near(p, 1/float64(k), 1e-15) {
						t.Errorf("K=%d α=%g: Dist[%d] = %g, want uniform", k, alpha, v, p)
					}
				}
				ch, err := b.Chain(nil, st, 1, 0, nil, tgt)
				if err != nil {
					t.Fatal(err)
				}
				if !near(ch.Err, want, 1e-15) {
					t.Errorf("K=%d α=%g target %d: chain(m=0) Err %.17g, prior variance %.17g", k, alpha, tgt, ch.Err, want)
				}
			}
		}
	}
}

// TestChainExactMarkov feeds the expected pair counts of a true Markov chain
// X0→X1→X2→X3 and checks p̂ against P(X3 | X0 = u) = e_uᵀ T1 T2 T3, which is
// exact by the Markov property (Chapman–Kolmogorov; common practice).
func TestChainExactMarkov(t *testing.T) {
	t.Parallel()
	pi0 := []float64{0.5, 0.3, 0.2}
	T := [][][]float64{
		{{0.8, 0.15, 0.05}, {0.1, 0.7, 0.2}, {0.2, 0.2, 0.6}},
		{{0.6, 0.3, 0.1}, {0.05, 0.9, 0.05}, {0.3, 0.1, 0.6}},
		{{0.9, 0.05, 0.05}, {0.2, 0.5, 0.3}, {0.1, 0.3, 0.6}},
	}
	// Non-monotonic ids so that lookups hit both stored orientations.
	ids := []graphidx.EntityID{7, 3, 9, 1}
	st := newMemStats()
	for _, id := range ids {
		st.entity(id, 3)
	}
	const n = 1e9 // expected counts; each cell < 2³²
	marg := pi0
	for k, tk := range T {
		rows := make([][]uint32, 3)
		next := make([]float64, 3)
		for r := range rows {
			rows[r] = make([]uint32, 3)
			for j := range rows[r] {
				rows[r][j] = uint32(math.Round(n * marg[r] * tk[r][j]))
				next[j] += marg[r] * tk[r][j]
			}
		}
		st.pair(ids[k], ids[k+1], rows)
		marg = next
	}
	b := mustBayes(t, scorer.WithBeta(0), scorer.WithMissingSignal(0, 0))
	ws := scorer.NewWorkspace()
	for u := 0; u < 3; u++ {
		// Exact: x ← x·T_k by hand.
		x := []float64{0, 0, 0}
		x[u] = 1
		for _, tk := range T {
			y := make([]float64, 3)
			for r := range x {
				for j := range y {
					y[j] += x[r] * tk[r][j]
				}
			}
			x = y
		}
		est, err := b.Chain(ws, st, ids[0], u, ids[1:3], ids[3])
		if err != nil {
			t.Fatal(err)
		}
		for v := range x {
			if !near(est.Dist[v], x[v], 1e-6) {
				t.Errorf("u=%d: p̂[%d] = %.9f, exact P(X3=%d|X0=%d) = %.9f", u, v, est.Dist[v], v, u, x[v])
			}
		}
		if est.Err <= 0 || est.Err > 1e-8 {
			t.Errorf("u=%d: Err %g, want tiny and positive at 10⁹ contexts", u, est.Err)
		}
	}
}

// TestChainSprinklerSeparator checks the chain through a true separator on
// the sprinkler network: Sprinkler ⊥ Rain | Cloudy, so the chain
// Sprinkler→Cloudy→Rain is exact. Value index 0 = "false", 1 = "true"
// (ascending byte order of the labels).
func TestChainSprinklerSeparator(t *testing.T) {
	t.Parallel()
	// AIMA 3rd ed. §14.5 CPTs: P(C)=.5, P(S|C)=.1, P(S|¬C)=.5, P(R|C)=.8, P(R|¬C)=.2.
	pc := []float64{0.5, 0.5}
	ps := [2][2]float64{{0.5, 0.5}, {0.9, 0.1}} // ps[c][s]
	pr := [2][2]float64{{0.8, 0.2}, {0.2, 0.8}} // pr[c][r]
	const n = 1e9
	var sc, cr, sr [2][2]float64
	for c := 0; c < 2; c++ {
		for s := 0; s < 2; s++ {
			for r := 0; r < 2; r++ {
				p := pc[c] * ps[c][s] * pr[c][r]
				sc[s][c] += p
				cr[c][r] += p
				sr[s][r] += p
			}
		}
	}
	tab := func(p [2][2]float64) [][]uint32 {
		return [][]uint32{
			{uint32(math.Round(n * p[0][0])), uint32(math.Round(n * p[0][1]))},
			{uint32(math.Round(n * p[1][0])), uint32(math.Round(n * p[1][1]))},
		}
	}
	const cloudy, rain, sprinkler = 1, 2, 3
	st := newMemStats().entity(cloudy, 2).entity(rain, 2).entity(sprinkler, 2).
		pair(sprinkler, cloudy, tab(sc)).pair(cloudy, rain, tab(cr)).pair(sprinkler, rain, tab(sr))
	b := mustBayes(t)
	dir, err := b.Direct(nil, st, sprinkler, 1, rain)
	if err != nil {
		t.Fatal(err)
	}
	ch, err := b.Chain(nil, st, sprinkler, 1, []graphidx.EntityID{cloudy}, rain)
	if err != nil {
		t.Fatal(err)
	}
	// AIMA 3rd ed. §14.5: P(Rain | Sprinkler = true) = ⟨0.3, 0.7⟩ (true, false).
	for name, e := range map[string]scorer.Estimate{"direct": dir, "chain": ch} {
		if !near(e.Dist[1], 0.3, 1e-6) || !near(e.Dist[0], 0.7, 1e-6) {
			t.Errorf("%s: P(R|S=true) = ⟨%.7f, %.7f⟩, AIMA §14.5 gives ⟨0.3, 0.7⟩", name, e.Dist[1], e.Dist[0])
		}
	}
}
