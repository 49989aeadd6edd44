package eval

import (
	"context"
	"fmt"
	"math"
	"slices"

	"github.com/hopwise/hopwise/internal/world"
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
	// Worlds, when set, are the network configurations of the fit worlds:
	// seed i is generated from Worlds[i mod len(Worlds)] (for example
	// binary and multi-valued networks mixed); otherwise Base.World.
	Worlds []world.Config
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
	// NoiseKs are the candidate k of the gain margin (default
	// DefaultFitNoiseKs), each ≥ 0.
	NoiseKs []float64
	// Log, when set, receives one line per pass.
	Log func(format string, args ...any)
}

// DefaultFitNoiseKs is the k grid of Fit (scorer.WithNoiseK).
var DefaultFitNoiseKs = []float64{0, 0.5, 1, 1.5, 2, 3, 4}

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
	// PriorStrength is A of the direct estimate's empirical-Bayes prior
	// (scorer.FitPriorStrength), fitted on PriorSamples unobserved-pair
	// queries.
	PriorStrength float64 `json:"prior_strength"`
	// UnseenSpread is η of the unobserved-pair error
	// (scorer.FitUnseenSpread), on the same queries.
	UnseenSpread float64 `json:"unseen_spread"`
	PriorSamples int     `json:"prior_samples"`
	// NoiseK is k of the gain margin (scorer.WithNoiseK): the grid value
	// with the smallest routed MSE over all queries of the fit worlds.
	NoiseK    float64    `json:"noise_k"`
	NoiseGrid []NoiseFit `json:"noise_grid"`
	// Support is the support model's fit (v0, n0, β, RMSE, N).
	Support scorer.SupportFit `json:"support"`
	// Seeds are the worlds used.
	Seeds []int64 `json:"seeds"`
	// Values holds, per fit world (in seed order), the most values a
	// variable of the generated network has.
	Values []int `json:"values"`
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

// NoiseFit is the outcome of one candidate k of the gain margin: the routed
// MSE (Σ_v (p̂_v − p_v)²/K per query, mean over the fit worlds' queries) of
// all queries, the held-out and the supported ones, and the share of
// supported queries answered through a chain.
type NoiseFit struct {
	K                   float64 `json:"k"`
	All                 float64 `json:"all"`
	HeldOut             float64 `json:"heldout"`
	Supported           float64 `json:"supported"`
	SupportedChainShare float64 `json:"supported_chain_share"`
}

// Fit calibrates the error models on the worlds of cfg.Seeds.
//
// Direct prior: A of the empirical-Bayes prior (scorer.WithPriorStrength)
// comes first, from scorer.FitPriorStrength on every held-out query of the
// fit worlds (pairs never observed together): the spread 1 − Σ_v m̂_v² of
// the target's smoothed marginal against the realised Σ_v (m̂_v − p_v)². It
// does not depend on the other constants, which are then fitted with it.
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
// Gain margin: with A, β, γ and δ fixed, k (scorer.WithNoiseK) is the value
// of the grid NoiseKs whose answers have the smallest routed MSE over all
// queries of the fit worlds (a decision threshold, so it is chosen by the
// loss it controls; ties go to the smaller k).
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
	if len(fc.NoiseKs) == 0 {
		fc.NoiseKs = DefaultFitNoiseKs
	}
	for _, k := range fc.NoiseKs {
		if !(k >= 0) || math.IsInf(k, 1) {
			return FitResult{}, fmt.Errorf("%w: fit k = %v, want a finite k ≥ 0", ErrConfig, k)
		}
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
	for i, seed := range fc.Seeds {
		c := fc.Base
		c.Seed = seed
		if len(fc.Worlds) > 0 {
			w := fc.Worlds[i%len(fc.Worlds)]
			c.World = &w
		}
		c.KeepQueries = true
		c.Dir = ""
		b, err := Prepare(ctx, c)
		if err != nil {
			return FitResult{}, err
		}
		benches = append(benches, b)
	}
	res := FitResult{Seeds: fc.Seeds, Condition: benches[0].cfg.Condition}
	for _, b := range benches {
		k := 0
		for v := range b.World.NumVars() {
			k = max(k, b.World.Card(v))
		}
		res.Values = append(res.Values, k)
	}
	// answerAll answers every fit world; rho and ratio are the means over
	// worlds of the calibration figures.
	var fitted []scorer.Option // constants fitted so far, applied after the base options
	answerAll := func(beta, gamma, delta float64, extra ...scorer.Option) (qs []QueryResult, rho, ratio float64, err error) {
		opts := append(slices.Clone(fc.Base.ModelOptions), fitted...)
		opts = append(opts, scorer.WithBeta(beta), scorer.WithMissingSignal(gamma, delta))
		model, err := scorer.NewBayes(append(opts, extra...)...)
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
	// Direct prior strength A, from the held-out (never co-observed) pairs.
	{
		qs, _, _, err := answerAll(beta0, 1, DefaultFitDeltas[0])
		if err != nil {
			return res, err
		}
		var ps []scorer.PriorSample
		for i := range qs {
			q := &qs[i]
			if q.DirectSup != 0 {
				continue
			}
			m := q.Est[EstMarginal]
			spread := 1.0
			for _, p := range m {
				spread -= p * p
			}
			r := 1 - q.FromShare
			ps = append(ps, scorer.PriorSample{Spread: max(0, spread), SqErr: q.SqErr(EstMarginal), Rarity: r * r * (1 - 1/float64(len(m)))})
		}
		a, err := scorer.FitPriorStrength(ps)
		if err != nil {
			return res, fmt.Errorf("eval: fit prior strength: %w", err)
		}
		eta, err := scorer.FitUnseenSpread(ps)
		if err != nil {
			return res, fmt.Errorf("eval: fit unseen spread: %w", err)
		}
		res.PriorStrength, res.UnseenSpread, res.PriorSamples = a, eta, len(ps)
		fitted = append(fitted, scorer.WithPriorStrength(a), scorer.WithUnseenSpread(eta))
		logf("prior strength A %.6g, unseen spread η %.6g on %d unobserved-pair queries", a, eta, len(ps))
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
				if q.Mode != router.ModeChain || q.ChainSups == nil || q.ChainParallel {
					// A parallel answer is not a chain of the chain error
					// model (docs/QUALITY.md §4e).
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
	// Gain margin k: the smallest routed MSE over all queries.
	bestAll := math.Inf(1)
	for _, k := range fc.NoiseKs {
		qs, _, _, err := answerAll(res.Beta, res.Gamma, res.Delta, scorer.WithNoiseK(k))
		if err != nil {
			return res, err
		}
		nf := noiseFit(k, qs)
		res.NoiseGrid = append(res.NoiseGrid, nf)
		logf("k %g: routed MSE all %.6g, held-out %.6g, supported %.6g (%.2f%% of supported chained)", k, nf.All, nf.HeldOut, nf.Supported, 100*nf.SupportedChainShare)
		if nf.All < bestAll {
			bestAll, res.NoiseK = nf.All, k
		}
	}
	fitted = append(fitted, scorer.WithNoiseK(res.NoiseK))
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

// noiseFit summarises the routed MSE of one candidate k over the pooled
// queries of the fit worlds.
func noiseFit(k float64, qs []QueryResult) NoiseFit {
	nf := NoiseFit{K: k}
	var nAll, nH, nS, chained float64
	for i := range qs {
		q := &qs[i]
		e := q.SqErr(EstRouted) / float64(len(q.Truth))
		nf.All += e
		nAll++
		switch q.Set {
		case SetHeldOut:
			nf.HeldOut += e
			nH++
		case SetSupported:
			nf.Supported += e
			nS++
			if q.Mode == router.ModeChain {
				chained++
			}
		}
	}
	div := func(a, b float64) float64 {
		if b == 0 {
			return math.NaN()
		}
		return a / b
	}
	nf.All, nf.HeldOut, nf.Supported = div(nf.All, nAll), div(nf.HeldOut, nH), div(nf.Supported, nS)
	nf.SupportedChainShare = div(chained, nS)
	return nf
}
