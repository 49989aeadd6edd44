package eval_test

import (
	"context"
	"errors"
	"math"
	"slices"
	"testing"

	"github.com/hopwise/hopwise/internal/eval"
	"github.com/hopwise/hopwise/internal/world"
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

// TestFitMixedWorlds: FitConfig.Worlds sets the network of each fit world
// (seed i from Worlds[i mod len]), so a fit can mix binary and multi-valued
// networks; the result names the K of every world it was fitted on.
func TestFitMixedWorlds(t *testing.T) {
	t.Parallel()
	base := smallConfig(0)
	bin, three := *base.World, *base.World
	three.Values, three.CPTAlpha, three.CPTBeta, three.MaxParents = 3, 0.5, 0.5, 2
	fr, err := eval.Fit(context.Background(), eval.FitConfig{
		Base: base, Seeds: []int64{5, 6, 7}, Worlds: []world.Config{bin, three},
		Deltas: []float64{0.125}, MaxIter: 1, NoiseKs: []float64{1},
	})
	if err != nil {
		t.Fatal(err)
	}
	if want := []int{2, 3, 2}; !slices.Equal(fr.Values, want) {
		t.Errorf("fit worlds have %v values, want %v", fr.Values, want)
	}
}
