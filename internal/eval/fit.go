package eval

import (
	"context"
	"fmt"
	"math"

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
	// MaxIter bounds the fixed-point passes (default 6).
	MaxIter int
	// Tol is the relative change of β that stops the iteration (default 0.02).
	Tol float64
	// Log, when set, receives one line per pass.
	Log func(format string, args ...any)
}

// FitResult holds the fitted constants and the evidence behind them.
type FitResult struct {
	// Beta is the Bayes model's per-hop squared bias β.
	Beta float64 `json:"beta"`
	// BetaPath lists β of every pass, the start value first.
	BetaPath []float64 `json:"beta_path"`
	// ChainSamples is the number of chains β was fitted on (last pass).
	ChainSamples int `json:"chain_samples"`
	// Support is the support model's fit (v0, n0, β, RMSE, N).
	Support scorer.SupportFit `json:"support"`
	// Seeds are the worlds used.
	Seeds []int64 `json:"seeds"`
	// Condition is the world condition used.
	Condition string `json:"condition"`
}

// Fit calibrates the error models on the worlds of cfg.Seeds.
//
// β (Bayes model): a fixed-point iteration. Starting from StartBeta, every
// pass answers all queries of all worlds through the router with the current
// β, takes the best chain the router found for each query (whether or not it
// routed to it) as a sample (Var = Chain.Err − β·m, Hops = m, SqErr = Σ_v
// (p̂_v − p_v)²), and sets β to scorer.FitHopBias of the pooled samples.
// Chain.Err includes the router's reference-bias term, so Var here is the
// variance plus that term, and β fits only the per-hop residual. The
// samples are the chains the router actually picks, so β measures their bias;
// since the router's pick depends on β, the iteration repeats until β changes
// by less than Tol (relative) or MaxIter passes ran.
//
// Support model: with the final β, every query contributes its direct answer
// (one edge: the pair support; SqErr of the direct estimate) and, when a chain
// was found, that chain (its edge supports; SqErr of the chain estimate); the
// pooled samples go to scorer.FitSupport (least squares for v0, n0, β).
//
// Cost: passes × worlds × (queries × one router decision + chain scorings);
// the worlds are built once.
func Fit(ctx context.Context, fc FitConfig) (FitResult, error) {
	if len(fc.Seeds) == 0 {
		return FitResult{}, fmt.Errorf("%w: fit needs at least one seed", ErrConfig)
	}
	if fc.MaxIter <= 0 {
		fc.MaxIter = 6
	}
	if fc.Tol <= 0 {
		fc.Tol = 0.02
	}
	beta := scorer.DefaultBeta
	if fc.StartBeta != nil {
		beta = *fc.StartBeta
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
	res := FitResult{Seeds: fc.Seeds, Condition: benches[0].cfg.Condition, BetaPath: []float64{beta}}
	answerAll := func(bt float64) ([]QueryResult, error) {
		var all []QueryResult
		for _, b := range benches {
			r, err := b.Answer(ctx, &bt, fc.Base.RouterOptions...)
			if err != nil {
				return nil, err
			}
			all = append(all, r.Queries...)
		}
		return all, nil
	}
	var qs []QueryResult
	for pass := 1; pass <= fc.MaxIter; pass++ {
		var err error
		if qs, err = answerAll(beta); err != nil {
			return res, err
		}
		var samples []scorer.ChainSample
		for i := range qs {
			q := &qs[i]
			if q.ChainSups == nil {
				continue
			}
			v := q.ChainErr - beta*float64(q.ChainBridges)
			samples = append(samples, scorer.ChainSample{Var: max(0, v), Hops: q.ChainBridges, SqErr: q.SqErr(EstChain)})
		}
		nb, err := scorer.FitHopBias(samples)
		if err != nil {
			return res, fmt.Errorf("eval: fit β (pass %d): %w", pass, err)
		}
		res.ChainSamples = len(samples)
		res.BetaPath = append(res.BetaPath, nb)
		logf("pass %d: β %.6g → %.6g on %d chains", pass, beta, nb, len(samples))
		done := math.Abs(nb-beta) <= fc.Tol*math.Max(nb, 1e-12)
		beta = nb
		if done {
			break
		}
	}
	res.Beta = beta
	// Support model on the answers of the final β.
	var err error
	if qs, err = answerAll(beta); err != nil {
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
