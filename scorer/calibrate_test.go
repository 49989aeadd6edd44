package scorer_test

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/hopwise/hopwise/scorer"
)

// supportSamples draws paths of 0–3 bridges with log-uniform supports and
// squared errors v0·Σ 1/(s+n0) + β·m, times multiplicative noise
// exp(σ·z − σ²/2) (mean 1).
func supportSamples(seed uint64, n int, v0, n0, beta, sigma float64) []scorer.SupportSample {
	rng := rand.New(rand.NewPCG(seed, 1))
	out := make([]scorer.SupportSample, n)
	for i := range out {
		m := rng.IntN(4)
		sup := make([]uint64, m+1)
		f := 0.0
		for e := range sup {
			sup[e] = uint64(math.Exp(rng.Float64() * math.Log(5000)))
			f += 1 / (float64(sup[e]) + n0)
		}
		y := v0*f + beta*float64(m)
		if sigma > 0 {
			y *= math.Exp(sigma*rng.NormFloat64() - sigma*sigma/2)
		}
		out[i] = scorer.SupportSample{Supports: sup, SqErr: y}
	}
	return out
}

func TestFitSupportRecoversConstants(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name              string
		v0, n0, beta, sig float64
		tol               float64 // relative tolerance on v0 and n0
	}{
		// Noise-free data generated from the model (common practice: a fit
		// must recover the parameters that generated its data).
		{"exact", 0.25, 3, 0.002, 0, 1e-4},
		{"exact, no bias", 0.6, 0.5, 0, 0, 1e-4},
		{"noisy", 0.3, 5, 0.001, 0.3, 0.15},
	} {
		fit, err := scorer.FitSupport(supportSamples(7, 4000, c.v0, c.n0, c.beta, c.sig))
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if math.Abs(fit.V0-c.v0) > c.tol*c.v0 || math.Abs(fit.N0-c.n0) > c.tol*c.n0 ||
			math.Abs(fit.Beta-c.beta) > c.tol*0.01+c.tol*c.beta {
			t.Errorf("%s: fit v0 %.5g n0 %.5g β %.5g, want %.5g %.5g %.5g", c.name, fit.V0, fit.N0, fit.Beta, c.v0, c.n0, c.beta)
		}
		t.Logf("%s: v0 %.5g n0 %.5g β %.5g RMSE %.3g", c.name, fit.V0, fit.N0, fit.Beta, fit.RMSE)
		if c.sig == 0 && fit.RMSE > 1e-6 {
			t.Errorf("%s: RMSE %g on noise-free data", c.name, fit.RMSE)
		}
		if _, err := scorer.NewSupport(fit.Options()...); err != nil {
			t.Errorf("%s: fitted options rejected: %v", c.name, err)
		}
	}
}

func TestFitSupportErrors(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name string
		in   []scorer.SupportSample
	}{
		{"empty", nil},
		{"no supports", []scorer.SupportSample{{SqErr: 1}}},
		{"NaN", []scorer.SupportSample{{Supports: []uint64{1}, SqErr: math.NaN()}}},
		{"negative", []scorer.SupportSample{{Supports: []uint64{1}, SqErr: -1}}},
		{"increasing with support", []scorer.SupportSample{
			{Supports: []uint64{1}, SqErr: 0}, {Supports: []uint64{10}, SqErr: 0.5}, {Supports: []uint64{100}, SqErr: 0.9}}},
	} {
		if _, err := scorer.FitSupport(c.in); !errors.Is(err, scorer.ErrFit) {
			t.Errorf("%s: error %v, want ErrFit", c.name, err)
		}
	}
}

func TestFitHopBias(t *testing.T) {
	t.Parallel()
	// Hand-computed: Σ m(e−v) = 1·(0.012−0.010) + 2·(0.030−0.010) + 0 = 0.042,
	// Σ m² = 1 + 4 = 5, β = 0.0084.
	got, err := scorer.FitHopBias([]scorer.ChainSample{
		{Var: 0.010, Hops: 1, SqErr: 0.012},
		{Var: 0.010, Hops: 2, SqErr: 0.030},
		{Var: 0.5, Hops: 0, SqErr: 0},
	})
	if err != nil || math.Abs(got-0.0084) > 1e-15 {
		t.Errorf("β = %v (%v), want 0.0084", got, err)
	}
	// Errors below the variance clamp β at 0.
	if got, _ := scorer.FitHopBias([]scorer.ChainSample{{Var: 0.1, Hops: 2, SqErr: 0.01}}); got != 0 {
		t.Errorf("β = %v, want 0", got)
	}
	for _, bad := range [][]scorer.ChainSample{
		nil,
		{{Var: 0.1, Hops: 0, SqErr: 0.1}},
		{{Var: -1, Hops: 1, SqErr: 0.1}},
		{{Var: 0.1, Hops: -1, SqErr: 0.1}},
		{{Var: 0.1, Hops: 1, SqErr: math.Inf(1)}},
	} {
		if _, err := scorer.FitHopBias(bad); !errors.Is(err, scorer.ErrFit) {
			t.Errorf("%v: error %v, want ErrFit", bad, err)
		}
	}
}

func ExampleFitSupport() {
	// Realised squared errors of three direct answers and one chain.
	fit, err := scorer.FitSupport([]scorer.SupportSample{
		{Supports: []uint64{0}, SqErr: 0.125},
		{Supports: []uint64{8}, SqErr: 0.025},
		{Supports: []uint64{98}, SqErr: 0.0025},
		{Supports: []uint64{8, 18}, SqErr: 0.0475},
	})
	if err != nil {
		panic(err)
	}
	fmt.Printf("v0 %.3f  n0 %.3f  β %.4f\n", fit.V0, fit.N0, fit.Beta)
	// Output:
	// v0 0.250  n0 2.000  β 0.0100
}
