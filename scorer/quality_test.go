package scorer_test

import (
	"errors"
	"math"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// margStats adds marginal counts (scorer.Marginals) to memStats.
type margStats struct {
	*memStats
	marg map[graphidx.EntityID][]uint64
}

func (m margStats) Marginal(id graphidx.EntityID) []uint64 { return m.marg[id] }

// TestDirectMarginalPrior checks the empirical-Bayes direct estimate by
// hand. Target 3 has marginal counts (30, 10), so m̂ = (31/42, 11/42) with
// α = 1. A pair never observed answers m̂ with Err (1 − Σ m̂²)/(A + 1). A
// pair of support S = 6 has prior pseudo-counts a_v = w·A·m̂_v + (1 − w)·α,
// w = A/(A + S). Without marginals the prior is uniform, as before.
func TestDirectMarginalPrior(t *testing.T) {
	t.Parallel()
	const a = 2.5
	ms := newMemStats().entity(1, 2).entity(2, 2).entity(3, 2)
	ms.pair(2, 3, [][]uint32{{4, 1}, {0, 1}})
	st := margStats{ms, map[graphidx.EntityID][]uint64{3: {30, 10}}}
	m := mustBayes(t, scorer.WithPriorStrength(a))
	mh := []float64{31.0 / 42, 11.0 / 42}

	d, err := m.Direct(nil, st, 1, 0, 3)
	if err != nil {
		t.Fatal(err)
	}
	wantErr := (1 - mh[0]*mh[0] - mh[1]*mh[1]) / (a + 1)
	if !near(d.Dist[0], mh[0], 1e-15) || !near(d.Err, wantErr, 1e-15) || d.Var != d.Err || d.Support != 0 {
		t.Errorf("unseen pair: %+v, want Dist %v, Err %v", d, mh, wantErr)
	}

	// Row u = 0 of the pair (2, 3): counts (4, 1), support S = 6.
	w := a / (a + 6)
	pc := []float64{w*a*mh[0] + (1-w)*1, w*a*mh[1] + (1-w)*1}
	a0 := pc[0] + pc[1]
	th0 := (4 + pc[0]) / (5 + a0)
	th1 := (1 + pc[1]) / (5 + a0)
	wantErr = (1 - th0*th0 - th1*th1) / (5 + a0 + 1)
	d, err = m.Direct(nil, st, 2, 0, 3)
	if err != nil {
		t.Fatal(err)
	}
	if !near(d.Dist[0], th0, 1e-15) || !near(d.Dist[1], th1, 1e-15) || !near(d.Err, wantErr, 1e-15) || d.Support != 6 {
		t.Errorf("seen pair: %+v, want Dist (%v, %v), Err %v, support 6", d, th0, th1, wantErr)
	}
	post, err := m.Posterior(nil, st, 2, 0, 3)
	if err != nil || !near(post[0], 4+pc[0], 1e-12) || !near(post[1], 1+pc[1], 1e-12) {
		t.Errorf("Posterior %v (%v), want (%v, %v)", post, err, 4+pc[0], 1+pc[1])
	}
	// A chain of no bridges is the direct estimate.
	c, err := m.Chain(nil, st, 2, 0, nil, 3)
	if err != nil || c.Err != d.Err || c.Dist[0] != d.Dist[0] {
		t.Errorf("Chain(m = 0) %+v (%v), Direct %+v", c, err, d)
	}
	// Without marginals: uniform Dirichlet(α), Err (K−1)/(K(Kα+1)) = 1/6.
	d, err = m.Direct(nil, ms, 1, 0, 3)
	if err != nil || d.Dist[0] != 0.5 || !near(d.Err, 1.0/6, 1e-15) {
		t.Errorf("without marginals: %+v (%v), want uniform, Err 1/6", d, err)
	}
	// With the observed entities' marginals too, the error is the shrinkage
	// MSE λ²(1 − Σθ̂²)/n_u + (1 − λ)²·E0, E0 = η(1 − P̂(s = u))²(1 − 1/K_t),
	// λ = n_u/(n_u + a₀); an unseen pair (λ = 0) gets E0.
	const eta = 0.7
	full := margStats{ms, map[graphidx.EntityID][]uint64{1: {90, 10}, 2: {5, 1}, 3: {30, 10}}}
	me := mustBayes(t, scorer.WithPriorStrength(a), scorer.WithUnseenSpread(eta))
	share1 := 91.0 / 102
	e0 := eta * (1 - share1) * (1 - share1) * 0.5
	if d, err := me.Direct(nil, full, 1, 0, 3); err != nil || !near(d.Err, e0, 1e-15) || !near(d.Dist[0], mh[0], 1e-15) {
		t.Errorf("unseen pair with marginals: %+v (%v), want Err %v", d, err, e0)
	}
	share2 := 6.0 / 8 // (5 + 1)/(6 + 2)
	e0 = eta * (1 - share2) * (1 - share2) * 0.5
	lam := 5 / (5 + a0)
	want := lam*lam*(1-th0*th0-th1*th1)/5 + (1-lam)*(1-lam)*e0
	if d, err := me.Direct(nil, full, 2, 0, 3); err != nil || !near(d.Err, want, 1e-15) || !near(d.Dist[0], th0, 1e-15) {
		t.Errorf("seen pair with marginals: %+v (%v), want Err %v", d, err, want)
	}
	// A marginal of the wrong length is ignored (uniform prior).
	bad := margStats{ms, map[graphidx.EntityID][]uint64{3: {1, 2, 3}}}
	if d, err := m.Direct(nil, bad, 1, 0, 3); err != nil || d.Dist[0] != 0.5 {
		t.Errorf("wrong-length marginal: %+v (%v), want the uniform prior", d, err)
	}
}

// TestSeparationCollider: a → c ← d with a and d independent (their own
// table shows it). The chain a → c → d through the common effect c invents
// a dependence. Here c's only chain neighbours are the endpoints and the
// statistics list no other witnesses, so the separation bias is exactly
// max(0, ‖p̂_chain − p̂_direct‖² − Var_chain − Var_direct) with the direct
// estimate under the symmetric α prior. Without the (a, d) table the check
// has nothing to compare with and charges nothing; λ scales the charge.
func TestSeparationCollider(t *testing.T) {
	t.Parallel()
	st := newMemStats().entity(1, 2).entity(2, 2).entity(3, 2).entity(4, 2)
	st.pair(1, 2, [][]uint32{{180, 20}, {30, 170}}) // a → c
	st.pair(2, 3, [][]uint32{{160, 50}, {40, 150}}) // c ← d (shows as dependence)
	st.pair(1, 3, [][]uint32{{100, 100}, {99, 101}})
	st.pair(2, 4, [][]uint32{{150, 60}, {50, 140}}) // c — e, e never seen with a
	// The check reads the pair's own table with the hop prior; set to α
	// here, so that its row is the direct estimate the expectation uses.
	hop := scorer.WithHopAlpha(scorer.DefaultAlpha)
	off := mustBayes(t, scorer.WithSeparation(0), hop)
	on := mustBayes(t, hop)
	twice := mustBayes(t, scorer.WithSeparation(2), hop)
	for u := range 2 {
		cOff, err := off.Chain(nil, st, 1, u, []graphidx.EntityID{2}, 3)
		if err != nil {
			t.Fatal(err)
		}
		cOn, err := on.Chain(nil, st, 1, u, []graphidx.EntityID{2}, 3)
		if err != nil {
			t.Fatal(err)
		}
		dir, err := off.Direct(nil, st, 1, u, 3)
		if err != nil {
			t.Fatal(err)
		}
		want := max(0, scorer.ReferenceBias(cOff.Dist, dir.Dist)-cOff.Var-dir.Var)
		if got := cOn.Err - cOff.Err; !near(got, want, 1e-12) || want < 0.05 {
			t.Errorf("u=%d: separation bias %.15g, want %.15g (and ≥ 0.05: the chain answers %v, the pair's own table %v)", u, got, want, cOff.Dist, dir.Dist)
		}
		if cOn.Var != cOff.Var || cOn.Dist[0] != cOff.Dist[0] {
			t.Errorf("u=%d: the check changed the estimate or its variance", u)
		}
		c2, err := twice.Chain(nil, st, 1, u, []graphidx.EntityID{2}, 3)
		if err != nil {
			t.Fatal(err)
		}
		if !near(c2.Err-cOff.Err, 2*want, 1e-12) {
			t.Errorf("u=%d: λ = 2 charged %.15g, want %.15g", u, c2.Err-cOff.Err, 2*want)
		}
		// (1, 4) was never observed together: nothing to check.
		n0, err := off.Chain(nil, st, 1, u, []graphidx.EntityID{2}, 4)
		if err != nil {
			t.Fatal(err)
		}
		n1, err := on.Chain(nil, st, 1, u, []graphidx.EntityID{2}, 4)
		if err != nil {
			t.Fatal(err)
		}
		if n1.Err != n0.Err {
			t.Errorf("u=%d: unchecked bridge charged %g", u, n1.Err-n0.Err)
		}
	}
}

func TestFitPriorStrength(t *testing.T) {
	t.Parallel()
	// Exact data SqErr = Spread/(A+1) with A = 4 (c = 0.2).
	var exact []scorer.PriorSample
	for _, s := range []float64{0.1, 0.3, 0.5, 0.42} {
		exact = append(exact, scorer.PriorSample{Spread: s, SqErr: 0.2 * s})
	}
	if a, err := scorer.FitPriorStrength(exact); err != nil || !near(a, 4, 1e-12) {
		t.Errorf("exact data: A %v (%v), want 4", a, err)
	}
	// Hand-computed: c = (0.5·0.05 + 0.4·0.2)/(0.25 + 0.16) = 0.105/0.41.
	a, err := scorer.FitPriorStrength([]scorer.PriorSample{{Spread: 0.5, SqErr: 0.05}, {Spread: 0.4, SqErr: 0.2}})
	if want := 0.41/0.105 - 1; err != nil || !near(a, want, 1e-12) {
		t.Errorf("A %v (%v), want %v", a, err, want)
	}
	for _, bad := range [][]scorer.PriorSample{
		nil,
		{{Spread: 0, SqErr: 0.1}},
		{{Spread: 0.5, SqErr: -1}},
		{{Spread: 1.5, SqErr: 0.1}},
		{{Spread: 0.5, SqErr: math.NaN()}},
		{{Spread: 0.5, SqErr: 0.6}}, // c > 1: farther than a uniform draw
		{{Spread: 0.5, SqErr: 0}},   // c = 0
	} {
		if _, err := scorer.FitPriorStrength(bad); !errors.Is(err, scorer.ErrFit) {
			t.Errorf("%v: error %v, want ErrFit", bad, err)
		}
	}
}

func TestFitUnseenSpread(t *testing.T) {
	t.Parallel()
	// Hand-computed: η = (0.5·0.2 + 0.25·0.1)/(0.25 + 0.0625) = 0.125/0.3125 = 0.4.
	eta, err := scorer.FitUnseenSpread([]scorer.PriorSample{{Rarity: 0.5, SqErr: 0.2}, {Rarity: 0.25, SqErr: 0.1}})
	if err != nil || !near(eta, 0.4, 1e-15) {
		t.Errorf("η %v (%v), want 0.4", eta, err)
	}
	for _, bad := range [][]scorer.PriorSample{nil, {{Rarity: 0, SqErr: 1}}, {{Rarity: 2, SqErr: 1}}, {{Rarity: 0.5, SqErr: -1}}, {{Rarity: math.NaN(), SqErr: 1}}} {
		if _, err := scorer.FitUnseenSpread(bad); !errors.Is(err, scorer.ErrFit) {
			t.Errorf("%v: error %v, want ErrFit", bad, err)
		}
	}
}

func TestGainMargin(t *testing.T) {
	t.Parallel()
	m := mustBayes(t, scorer.WithNoiseK(2))
	if got, want := m.GainMargin(0.01, 0.03), 2*math.Sqrt2*0.04; !near(got, want, 1e-15) {
		t.Errorf("GainMargin %v, want %v", got, want)
	}
	for _, c := range [][2]float64{{math.NaN(), 0}, {-1, 0}, {0, math.Inf(1)}} {
		if got := m.GainMargin(c[0], c[1]); got != 0 {
			t.Errorf("GainMargin(%v, %v) = %v, want 0", c[0], c[1], got)
		}
	}
	if got := mustBayes(t, scorer.WithNoiseK(0)).GainMargin(1, 1); got != 0 {
		t.Errorf("k = 0: margin %v", got)
	}
	if d := mustBayes(t); d.NoiseK() != scorer.DefaultNoiseK || d.PriorStrength() != scorer.DefaultPriorStrength || d.Separation() != scorer.DefaultSeparation {
		t.Errorf("defaults: k %v, A %v, λ %v", d.NoiseK(), d.PriorStrength(), d.Separation())
	}
}

func TestQualityOptionValidation(t *testing.T) {
	t.Parallel()
	for _, o := range []scorer.Option{
		scorer.WithPriorStrength(0), scorer.WithPriorStrength(-1), scorer.WithPriorStrength(math.NaN()), scorer.WithPriorStrength(math.Inf(1)),
		scorer.WithSeparation(-1), scorer.WithSeparation(math.NaN()), scorer.WithSeparation(math.Inf(1)),
		scorer.WithNoiseK(-0.5), scorer.WithNoiseK(math.NaN()), scorer.WithNoiseK(math.Inf(1)),
		scorer.WithUnseenSpread(-1), scorer.WithUnseenSpread(math.NaN()), scorer.WithUnseenSpread(math.Inf(1)),
	} {
		if _, err := scorer.NewBayes(o); !errors.Is(err, scorer.ErrBadOption) {
			t.Errorf("NewBayes: error %v, want ErrBadOption", err)
		}
	}
	for _, o := range []scorer.Option{scorer.WithPriorStrength(2), scorer.WithSeparation(1), scorer.WithNoiseK(1), scorer.WithUnseenSpread(1)} {
		if _, err := scorer.NewSupport(o); !errors.Is(err, scorer.ErrBadOption) {
			t.Errorf("NewSupport: error %v, want ErrBadOption", err)
		}
	}
}

// TestCombineVar: the combined Var is Σ w_i² Var_i with the inverse-error
// weights w = (0.75, 0.25) of errors (0.01, 0.03).
func TestCombineVar(t *testing.T) {
	t.Parallel()
	c, err := scorer.Combine([]scorer.Estimate{
		{Dist: []float64{0.2, 0.8}, Err: 0.01, Var: 0.004},
		{Dist: []float64{0.6, 0.4}, Err: 0.03, Var: 0.02},
	})
	if err != nil {
		t.Fatal(err)
	}
	if want := 0.75*0.75*0.004 + 0.25*0.25*0.02; !near(c.Var, want, 1e-15) {
		t.Errorf("Var %v, want %v", c.Var, want)
	}
}
