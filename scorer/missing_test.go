package scorer_test

import (
	"errors"
	"math"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// hand2x2Bound is max(0, φ − z/√n) of a 2×2 table of counts {a, b, c, d}
// smoothed by α = 1, by the φ coefficient (ad − bc)/√((a+b)(c+d)(a+c)(b+d))
// (common practice), n = support + 4.
func hand2x2Bound(a, b, c, d, z float64) float64 {
	a, b, c, d = a+1, b+1, c+1, d+1
	phi := math.Abs(a*d-b*c) / math.Sqrt((a+b)*(c+d)*(a+c)*(b+d))
	return max(0, phi-z/math.Sqrt(a+b+c+d))
}

// TestMissingSignalBias: a chain's Err with the missing-signal term equals
// its Err without it plus γ·(δ − L)₊², L the product of the edges' φ lower
// bounds computed by hand; a strong chain (L ≥ δ) pays nothing, an edge
// never observed makes L = 0 and the term γ·δ², and the estimate itself is
// unchanged.
func TestMissingSignalBias(t *testing.T) {
	t.Parallel()
	st := newMemStats().entity(1, 2).entity(2, 2).entity(3, 2).entity(4, 2).entity(5, 2)
	st.pair(1, 2, [][]uint32{{40, 10}, {10, 40}}) // φ = 15/26
	st.pair(2, 3, [][]uint32{{30, 20}, {22, 28}}) // weak
	st.pair(1, 4, [][]uint32{{90, 5}, {4, 95}})   // strong
	st.pair(4, 3, [][]uint32{{80, 12}, {9, 85}})  // strong
	st.pair(2, 5, [][]uint32{{5, 5}, {5, 5}})     // none
	const gamma, delta = 3.0, 0.4
	off := mustBayes(t, scorer.WithMissingSignal(0, delta))
	on := mustBayes(t, scorer.WithMissingSignal(gamma, delta))
	for _, c := range []struct {
		name    string
		bridges []graphidx.EntityID
		t       graphidx.EntityID
		l       float64
	}{
		{"weak", []graphidx.EntityID{2}, 3, hand2x2Bound(40, 10, 10, 40, 2) * hand2x2Bound(30, 20, 22, 28, 2)},
		{"strong", []graphidx.EntityID{4}, 3, hand2x2Bound(90, 5, 4, 95, 2) * hand2x2Bound(80, 12, 9, 85, 2)},
		{"no signal", []graphidx.EntityID{2}, 5, 0},
		{"unobserved edge", []graphidx.EntityID{2, 4}, 3, 0}, // (2, 4) never observed
	} {
		e0, err := off.Chain(nil, st, 1, 0, c.bridges, c.t)
		if err != nil {
			t.Fatal(err)
		}
		e1, err := on.Chain(nil, st, 1, 0, c.bridges, c.t)
		if err != nil {
			t.Fatal(err)
		}
		want := gamma * math.Pow(max(0, delta-c.l), 2)
		if got := e1.Err - e0.Err; !near(got, want, 1e-12) {
			t.Errorf("%s: missing-signal term %.15g, want %.15g (L = %g)", c.name, got, want, c.l)
		}
		for v := range e0.Dist {
			if e0.Dist[v] != e1.Dist[v] {
				t.Errorf("%s: estimate changed: %v vs %v", c.name, e0.Dist, e1.Dist)
			}
		}
		if c.name == "strong" && want != 0 {
			t.Errorf("strong chain: L = %g should exceed δ = %g", c.l, delta)
		}
	}
	// The bound is what EdgeCost takes the logarithm of.
	ps, _ := st.Pair(1, 2)
	if got, want := on.SignalBound(ps), math.Exp(-on.EdgeCost(ps)); !near(got, want, 1e-15) {
		t.Errorf("SignalBound %g, exp(−EdgeCost) %g", got, want)
	}
	// Direct answers carry no chain bias.
	d0, _ := off.Direct(nil, st, 1, 0, 2)
	d1, _ := on.Direct(nil, st, 1, 0, 2)
	if d0.Err != d1.Err {
		t.Errorf("direct Err %g vs %g", d0.Err, d1.Err)
	}
}

func TestWithMissingSignalValidation(t *testing.T) {
	t.Parallel()
	for _, c := range [][2]float64{{-1, 0.1}, {math.NaN(), 0.1}, {1, -0.1}, {1, 1.5}, {math.Inf(1), 0.1}} {
		if _, err := scorer.NewBayes(scorer.WithMissingSignal(c[0], c[1])); !errors.Is(err, scorer.ErrBadOption) {
			t.Errorf("WithMissingSignal(%v, %v): error %v, want ErrBadOption", c[0], c[1], err)
		}
	}
	if _, err := scorer.NewSupport(scorer.WithMissingSignal(1, 0.1)); !errors.Is(err, scorer.ErrBadOption) {
		t.Errorf("NewSupport(WithMissingSignal): error %v, want ErrBadOption", err)
	}
}

func TestFitChainBias(t *testing.T) {
	t.Parallel()
	const delta = 0.2
	// Exact data SqErr = Var + 0.003·m + 2·(δ − L)₊²: the fit recovers β and γ.
	var exact []scorer.ChainSample
	for i, l := range []float64{0, 0.05, 0.1, 0.3, 0.6, 0, 0.15} {
		m := 1 + i%3
		f := max(0, delta-l)
		exact = append(exact, scorer.ChainSample{Var: 0.001 * float64(i), Hops: m, Signal: l, SqErr: 0.001*float64(i) + 0.003*float64(m) + 2*f*f})
	}
	b, g, err := scorer.FitChainBias(exact, delta)
	if err != nil || !near(b, 0.003, 1e-12) || !near(g, 2, 1e-10) {
		t.Errorf("exact data: β %v γ %v (%v), want 0.003, 2", b, g, err)
	}
	// Hand-computed one-variable case: no weak chain (f = 0), so γ has no
	// data and β = Σ m(e−v)/Σ m² = (1·0.002 + 2·0.02)/5 = 0.0084, as FitHopBias.
	b, g, err = scorer.FitChainBias([]scorer.ChainSample{
		{Var: 0.010, Hops: 1, SqErr: 0.012, Signal: 0.5},
		{Var: 0.010, Hops: 2, SqErr: 0.030, Signal: 0.9},
	}, delta)
	if err != nil || !near(b, 0.0084, 1e-15) || g != 0 {
		t.Errorf("strong chains: β %v γ %v (%v), want 0.0084, 0", b, g, err)
	}
	// Errors that fall with hops but rise with missing signal: m = (1, 2),
	// f = (0.04, 0), y = SqErr − Var = (0.05, −0.01). The joint solution has
	// β = (0.03·0.0016 − 0.002·0.04)/0.0064 = −0.005 < 0, so β is clamped at 0
	// and γ refitted alone: γ = Σ f y/Σ f² = 0.002/0.0016 = 1.25 (its residual
	// beats the β-only fit's).
	b, g, err = scorer.FitChainBias([]scorer.ChainSample{
		{Var: 0, Hops: 1, SqErr: 0.05, Signal: 0},
		{Var: 0.01, Hops: 2, SqErr: 0, Signal: 1},
	}, delta)
	if err != nil || b != 0 || !near(g, 1.25, 1e-12) {
		t.Errorf("clamped: β %v γ %v (%v), want 0, 1.25", b, g, err)
	}
	for _, bad := range [][]scorer.ChainSample{
		nil,
		{{Var: 0.1, Hops: 0, SqErr: 0.1}},
		{{Var: -1, Hops: 1, SqErr: 0.1}},
		{{Var: 0.1, Hops: 1, SqErr: 0.1, Signal: 1.5}},
		{{Var: 0.1, Hops: 1, SqErr: math.NaN()}},
	} {
		if _, _, err := scorer.FitChainBias(bad, delta); !errors.Is(err, scorer.ErrFit) {
			t.Errorf("%v: error %v, want ErrFit", bad, err)
		}
	}
	if _, _, err := scorer.FitChainBias(exact, 2); !errors.Is(err, scorer.ErrFit) {
		t.Errorf("δ = 2: error %v, want ErrFit", err)
	}
}

// TestMissingSignalMultiValued: a chain of 4-valued entities whose edges
// each carry one strong binary contrast (values {0, 1} against {2, 3}) keeps
// its signal: L is the product of the edges' maximal-correlation lower
// bounds, here ≥ δ, so the chain pays no missing-signal term. Cramér's V of
// such an edge is ρ_m/√3, and the product of V's would have fallen below δ
// and charged γ·(δ − L)₊² to a chain that misses nothing.
func TestMissingSignalMultiValued(t *testing.T) {
	t.Parallel()
	// Rows: a value in {0, 1} puts 90 % of its mass on {0, 1}, a value in
	// {2, 3} 90 % on {2, 3}; 250 contexts per row.
	contrast := [][]uint32{
		{113, 112, 13, 12},
		{112, 113, 12, 13},
		{13, 12, 113, 112},
		{12, 13, 112, 113},
	}
	st := newMemStats().entity(1, 4).entity(2, 4).entity(3, 4)
	st.pair(1, 2, contrast).pair(2, 3, contrast)
	const gamma, delta = 3.0, 0.4
	off := mustBayes(t, scorer.WithMissingSignal(0, delta))
	on := mustBayes(t, scorer.WithMissingSignal(gamma, delta))
	ps, ok := st.Pair(1, 2)
	if !ok {
		t.Fatal("no pair (1, 2)")
	}
	// The maximal correlation is the contrast's |φ| on the 2×2 collapse,
	// about 0.8 = 0.9 − 0.1 (each half of a row splits evenly inside its
	// block), less z/√n = 2/√1016 ≈ 0.063: both edges together keep L ≥ δ.
	lb := on.SignalBound(ps)
	if l := lb * lb; !(l >= delta && lb <= 0.8) {
		t.Fatalf("signal bound %g (L = %g), want ≤ 0.8 with L ≥ δ = %g", lb, l, delta)
	}
	e0, err := off.Chain(nil, st, 1, 0, []graphidx.EntityID{2}, 3)
	if err != nil {
		t.Fatal(err)
	}
	e1, err := on.Chain(nil, st, 1, 0, []graphidx.EntityID{2}, 3)
	if err != nil {
		t.Fatal(err)
	}
	if e1.Err != e0.Err {
		t.Errorf("L = %g ≥ δ: Err %g with the term, %g without; want equal", lb*lb, e1.Err, e0.Err)
	}
}
