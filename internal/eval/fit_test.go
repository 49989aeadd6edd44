package eval_test

import (
	"context"
	"errors"
	"math"
	"testing"

	"github.com/hopwise/hopwise/internal/eval"
)

// TestFitSmallWorlds runs the calibration on two small worlds with a
// two-point δ grid and checks the selection rule: the reported constants
// are those of the grid point with the largest fit-world Spearman ρ, and
// every fitted constant is finite and ≥ 0.
func TestFitSmallWorlds(t *testing.T) {
	t.Parallel()
	fr, err := eval.Fit(context.Background(), eval.FitConfig{
		Base: smallConfig(0), Seeds: []int64{5, 6}, Deltas: []float64{0.1, 0.2}, MaxIter: 3,
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(fr.Grid) != 2 {
		t.Fatalf("grid %+v, want 2 points", fr.Grid)
	}
	best := fr.Grid[0]
	for _, g := range fr.Grid {
		if !(g.Beta >= 0 && g.Gamma >= 0) || math.IsInf(g.Beta, 0) || math.IsInf(g.Gamma, 0) || math.IsNaN(g.Spearman) {
			t.Errorf("grid point %+v", g)
		}
		if g.Spearman > best.Spearman {
			best = g
		}
	}
	if fr.Delta != best.Delta || fr.Beta != best.Beta || fr.Gamma != best.Gamma {
		t.Errorf("chose δ %g β %g γ %g, want the best-ρ grid point %+v", fr.Delta, fr.Beta, fr.Gamma, best)
	}
	if fr.ChainSamples == 0 || len(fr.BetaPath) < 2 || len(fr.GammaPath) != len(fr.BetaPath) {
		t.Errorf("samples %d, paths %v %v", fr.ChainSamples, fr.BetaPath, fr.GammaPath)
	}
	if fr.BetaPath[len(fr.BetaPath)-1] != fr.Beta || fr.GammaPath[len(fr.GammaPath)-1] != fr.Gamma {
		t.Errorf("paths %v %v do not end at β %g γ %g", fr.BetaPath, fr.GammaPath, fr.Beta, fr.Gamma)
	}
	if !(fr.Support.V0 > 0 && fr.Support.N0 > 0) {
		t.Errorf("support fit %+v", fr.Support)
	}
	t.Logf("δ %g β %g γ %g (grid %+v)", fr.Delta, fr.Beta, fr.Gamma, fr.Grid)

	if _, err := eval.Fit(context.Background(), eval.FitConfig{Base: smallConfig(0), Seeds: []int64{5}, Deltas: []float64{1.5}}); !errors.Is(err, eval.ErrConfig) {
		t.Errorf("δ 1.5: error %v, want ErrConfig", err)
	}
}
