package eval

import (
	"context"
	"fmt"
	"math"

	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
)

// FitConfig describes a calibration run (see Fit).
type FitConfig struct {
	// Base is the world configuration; its Seed is ignored.
	Base Config
	// Seeds are the worlds to fit on. They must differ from the seeds the
	// fitted values are evaluated on (Fit cannot check that; the CLI does).
	Seeds []int64
	// StartBeta is the β of the first pass (default scorer.DefaultBeta).
	StartBeta *float64
	// Deltas are the candidate δ of the missing-signal bias (default
	// DefaultFitDeltas), each in [0, 1].
	Deltas []float64
	// MaxIter bounds the fixed-point passes per δ (default 8).
	MaxIter int
	// Tol is the relative change of β and γ that stops the iteration
	// (default 0.02).
	Tol float64
	// Log, when set, receives one line per pass.
	Log func(format string, args ...any)
}

// DefaultFitDeltas is the δ grid of Fit.
var DefaultFitDeltas = []float64{0.05, 0.1, 0.125, 0.15, 0.175, 0.2, 0.25, 0.3}

// FitResult holds the fitted constants and the evidence behind them.
type FitResult struct {
	// Beta is the Bayes model's per-hop squared bias β.
	Beta float64 `json:"beta"`
	// Gamma and Delta are γ and δ of the Bayes model's missing-signal bias
	// γ·(δ − L)₊² (scorer.WithMissingSignal).
	Gamma float64 `json:"gamma"`
	Delta float64 `json:"delta"`
	// BetaPath and GammaPath list β and γ of every pass at the chosen δ, the
	// start values first.
	BetaPath  []float64 `json:"beta_path"`
	GammaPath []float64 `json:"gamma_path"`
	// Grid holds, for every candidate δ, the fitted β, γ and the mean
	// Spearman ρ of the fit worlds they give.
	Grid []DeltaFit `json:"grid"`
	// ChainSamples is the number of chains β and γ were fitted on (last pass
	// at the chosen δ).
	ChainSamples int `json:"chain_samples"`
	// Support is the support model's fit (v0, n0, β, RMSE, N).
	Support scorer.SupportFit `json:"support"`
	// Seeds are the worlds used.
	Seeds []int64 `json:"seeds"`
	// Condition is the world condition used.
	Condition string `json:"condition"`
}

// DeltaFit is the fixed point of one candidate δ.
type DeltaFit struct {
	Delta    float64 `json:"delta"`
	Beta     float64 `json:"beta"`
	Gamma    float64 `json:"gamma"`
	Spearman float64 `json:"spearman"`
	// MeanRatio is the mean over fit worlds of mean(predicted)/mean(realised).
	MeanRatio float64 `json:"mean_ratio"`
}

// Fit calibrates the error models on the worlds of cfg.Seeds.
//
// Bayes model: a chain of m bridges with signal L (the product of its edges'
// association lower bounds, scorer.Bayes.SignalBound) has the error
// Var + β·m + γ·(δ − L)₊², Var including the router's reference-bias term.
// For each δ of the grid, a fixed-point iteration starts from (StartBeta,
// γ = 1): every pass answers all queries of all worlds through the router
// with the current (β, γ, δ), takes every query the router answered through
// a chain as a sample (Var = Chain.Err − β·m − γ·(δ − L)₊², m, L and the
// realised Σ_v (p̂_v − p_v)²) and sets (β, γ) to scorer.FitChainBias of the
// pooled samples (least squares, both ≥ 0); it stops when both change by
// less than Tol (relative) or after MaxIter passes. The samples are the
// answers whose error the router predicts, and the router's choices depend
// on (β, γ), hence the iteration. δ enters the error non-linearly; it is
// chosen from the grid as the one whose fixed point gives the largest mean
// Spearman ρ (predicted against realised error, all queries) over the fit
// worlds — on the fit worlds only, never on evaluation worlds.
//
// Support model: with the final Bayes constants, every query contributes its
// direct answer (one edge: the pair support; SqErr of the direct estimate) and,
// when a chain was found, that chain (its edge supports; SqErr of the chain
// estimate); the pooled samples go to scorer.FitSupport (least squares for v0,
// n0, β).
//
// Cost: |Deltas| × passes × worlds × (queries × one router decision + chain
// scorings); the worlds are built once.
func Fit(ctx context.Context, fc FitConfig) (FitResult, error) {
	if len(fc.Seeds) == 0 {
		return FitResult{}, fmt.Errorf("%w: fit needs at least one seed", ErrConfig)
	}
	if fc.MaxIter <= 0 {
		fc.MaxIter = 8
	}
	if fc.Tol <= 0 {
		fc.Tol = 0.02
	}
	if len(fc.Deltas) == 0 {
		fc.Deltas = DefaultFitDeltas
	}
	for _, d := range fc.Deltas {
		if !(d >= 0 && d <= 1) {
			return FitResult{}, fmt.Errorf("%w: fit δ = %v, want [0, 1]", ErrConfig, d)
		}
	}
	beta0 := scorer.DefaultBeta
	if fc.StartBeta != nil {
		beta0 = *fc.StartBeta
	}
	logf := fc.Log
	if logf == nil {
		logf = func(string, ...any) {}
	}
	var benches []*Bench
	defer func() {
		for _, b := range benches {
			b.Close()
		}
	}()
	for _, seed := range fc.Seeds {
		c := fc.Base
		c.Seed = seed
		c.KeepQueries = true
		c.Dir = ""
		b, err := Prepare(ctx, c)
		if err != nil {
			return FitResult{}, err
		}
		benches = append(benches, b)
	}
	res := FitResult{Seeds: fc.Seeds, Condition: benches[0].cfg.Condition}
	// answerAll answers every fit world; rho and ratio are the means over
	// worlds of the calibration figures.
	answerAll := func(beta, gamma, delta float64) (qs []QueryResult, rho, ratio float64, err error) {
		model, err := scorer.NewBayes(scorer.WithBeta(beta), scorer.WithMissingSignal(gamma, delta))
		if err != nil {
			return nil, 0, 0, fmt.Errorf("eval: fit: %w", err)
		}
		for _, b := range benches {
			r, err := b.AnswerModel(ctx, model, fc.Base.RouterOptions...)
			if err != nil {
				return nil, 0, 0, err
			}
			qs = append(qs, r.Queries...)
			rho += r.Calibration.Spearman
			ratio += r.Calibration.MeanRatio
		}
		n := float64(len(benches))
		return qs, rho / n, ratio / n, nil
	}
	bestRho := math.Inf(-1)
	for _, delta := range fc.Deltas {
		beta, gamma := beta0, 1.0
		bp, gp := []float64{beta}, []float64{gamma}
		var samples []scorer.ChainSample
		for pass := 1; pass <= fc.MaxIter; pass++ {
			qs, _, _, err := answerAll(beta, gamma, delta)
			if err != nil {
				return res, err
			}
			samples = samples[:0]
			for i := range qs {
				q := &qs[i]
				if q.Mode != router.ModeChain || q.ChainSups == nil {
					continue
				}
				f := max(0, delta-q.ChainSignal)
				v := q.ChainErr - beta*float64(q.ChainBridges) - gamma*f*f
				samples = append(samples, scorer.ChainSample{Var: max(0, v), Hops: q.ChainBridges, SqErr: q.SqErr(EstChain), Signal: q.ChainSignal})
			}
			nb, ng, err := scorer.FitChainBias(samples, delta)
			if err != nil {
				return res, fmt.Errorf("eval: fit β, γ (δ %g, pass %d): %w", delta, pass, err)
			}
			bp, gp = append(bp, nb), append(gp, ng)
			logf("δ %g pass %d: β %.6g → %.6g, γ %.6g → %.6g on %d chains", delta, pass, beta, nb, gamma, ng, len(samples))
			done := math.Abs(nb-beta) <= fc.Tol*math.Max(nb, 1e-9) && math.Abs(ng-gamma) <= fc.Tol*math.Max(ng, 1e-9)
			beta, gamma = nb, ng
			if done {
				break
			}
		}
		_, rho, ratio, err := answerAll(beta, gamma, delta)
		if err != nil {
			return res, err
		}
		res.Grid = append(res.Grid, DeltaFit{Delta: delta, Beta: beta, Gamma: gamma, Spearman: rho, MeanRatio: ratio})
		logf("δ %g: β %.6g, γ %.6g, fit-world ρ %.4f, mean ratio %.3f", delta, beta, gamma, rho, ratio)
		if rho > bestRho {
			bestRho = rho
			res.Beta, res.Gamma, res.Delta = beta, gamma, delta
			res.BetaPath, res.GammaPath = bp, gp
			res.ChainSamples = len(samples)
		}
	}
	// Support model on the answers of the final constants.
	qs, _, _, err := answerAll(res.Beta, res.Gamma, res.Delta)
	if err != nil {
		return res, err
	}
	var ss []scorer.SupportSample
	for i := range qs {
		q := &qs[i]
		ss = append(ss, scorer.SupportSample{Supports: []uint64{q.DirectSup}, SqErr: q.SqErr(EstDirect)})
		if q.ChainSups != nil {
			ss = append(ss, scorer.SupportSample{Supports: q.ChainSups, SqErr: q.SqErr(EstChain)})
		}
	}
	if res.Support, err = scorer.FitSupport(ss); err != nil {
		return res, fmt.Errorf("eval: fit support model: %w", err)
	}
	logf("support model: v0 %.6g, n0 %.6g, β %.6g (RMSE %.4g, %d samples)", res.Support.V0, res.Support.N0, res.Support.Beta, res.Support.RMSE, res.Support.N)
	return res, nil
}
