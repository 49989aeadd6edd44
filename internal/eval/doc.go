// Package eval is the evaluation harness of hopwise: it measures the real
// index builder, scorer and router against exact truth on synthetic worlds
// (docs/DESIGN.md, Testbed). `hopwise eval` and the demo use it.
//
// # One world (Run = Prepare + Answer)
//
//  1. world.Generate draws the network (default world.EvalConfig: 100 binary
//     variables, 100 edges, Beta(0.2, 0.2) CPTs, 30 held-out pairs of mutual
//     information ≥ 0.01 nats) from Config.Seed.
//  2. world.WriteCorpus writes Config.Contexts contexts (default 50000) of the
//     condition (local-geometric, local-zipf, full, wrong) as JSONL.
//  3. The corpus is read back by corpus.Open (strict), counted by
//     graphidx.Compile, written by graphidx.WriteFile and opened by
//     graphidx.Open: the product's own build path.
//  4. Every held-out pair (never observed together) and every supported pair
//     (a network edge) is asked in both directions and for every value of the
//     observed endpoint. Each query goes through router.New(index).Decide
//     (Bayes model, β = Config.Beta) and the scorer, and yields:
//     - direct: Decision.Direct.Estimate, the pair's posterior mean;
//     - chain: the best chain the router found (Decision.Chain), or direct
//     when it found none;
//     - routed: Decision.Estimate, what the router chose;
//     - ideal: scorer Chain through world.MinimalSeparatorPath (for an edge,
//     the empty path, i.e. direct);
//     - negative: scorer Chain through world.RandomBridges, as many as the
//     ideal path has and at least one;
//     - support_only: scorer Chain through the chain of at most H bridges
//     whose smallest edge support is largest (bridges chosen by support
//     alone; see widestChain), to compare with the router's choice by
//     scored error;
//     - marginal: the target's marginal from the index, smoothed (α = 1);
//     - count_chain: scorer Chain through the chain of fewest bridges, the
//     widest (largest smallest edge support) among those.
//  5. Truth is world.TrueConditional (variable elimination).
//
// # Figures
//
// MSE of a query: Σ_v (p̂_v − p_v)² / K over the K values of the target (the
// mean over values; for binary targets (p̂_1 − p_1)²). A set's MSE is the
// plain mean over its queries. A query whose observed value never occurs in
// the corpus cannot be asked and is counted as skipped.
//
// Calibration: over all scored queries of a world, the router's predicted
// error of its chosen estimate (Decision.Err, on the scale Σ_v Var) against
// the realised Σ_v (p̂_v − p_v)²: Spearman's ρ (Pearson correlation of
// mid-ranks, gonum stat.Correlation) and mean(predicted)/mean(realised).
//
// Summarize averages worlds per condition (the mean of per-world figures).
//
// # Fitting the default constants (Fit, `hopwise eval --fit`)
//
// First the prior strength A of the direct estimate's empirical-Bayes prior
// (scorer.FitPriorStrength on the held-out queries: how far their exact
// conditionals lie from the target's marginal). Then, with A fixed:
//
// The Bayes model's chain bias is β·m + γ·(δ − L)₊² (L the chain's signal,
// scorer.Bayes.SignalBound). For every δ of a grid, (β, γ) is the fixed point
// of: answer all queries of the fit worlds, collect every answer the router
// gave through a chain (Var = Chain.Err − β·m − γ·(δ − L)₊², m bridges, L,
// realised Σ_v squared error), and set (β, γ) = scorer.FitChainBias(samples,
// δ); stop when both move by < 2 %. δ is the grid value whose fixed point
// gives the largest mean Spearman ρ on the fit worlds. Chain.Err carries the
// router's reference-bias term (scorer.ReferenceBias), so β and γ fit only
// the residual. Then k of the gain margin (scorer.WithNoiseK): the value
// of a grid whose answers have the smallest routed MSE over all queries of
// the fit worlds. The support model's
// v0, n0 and β come from scorer.FitSupport on the direct answers (one edge:
// the pair support) and the best chains (their edge supports) at the final
// Bayes constants.
// The fit worlds must use seeds other than the evaluation seeds: the
// installed defaults came from
//
//	hopwise eval --fit --fit-seeds 101,102,103,104,105
//
// on local-geometric worlds (EvalConfig, 50000 contexts) and were evaluated on
// seeds 1–5. FitConfig.Worlds (the CLI's --values, --cpt-alpha and
// --max-parents lists) gives each fit seed its own network, for fits on
// multi-valued or mixed networks.
//
// Concurrency: Run and Bench.Answer answer queries on Config.Workers
// goroutines, each with its own scorer.Workspace; results do not depend on
// the number of workers. A Bench is safe for concurrent Answer calls.
package eval
