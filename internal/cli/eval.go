package cli

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"github.com/hopwise/hopwise/internal/eval"
	"github.com/hopwise/hopwise/internal/world"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
	"github.com/spf13/cobra"
)

func init() { register(newEvalCmd) }

type evalOptions struct {
	conditions   string
	seed         int64
	seeds        string
	worlds       int
	contexts     int
	vars, edges  int
	heldOut      int
	values       string
	cptAlpha     string
	maxParents   string
	json         bool
	plot         string
	fit          bool
	fitSeeds     string
	beta         float64
	hopAlpha     float64
	prior        float64
	separation   float64
	parallel     bool
	noiseK       float64
	influence    float64
	spread       float64
	maxBridges   int
	beam         int
	fanOut       int
	candidates   int
	gainTau      float64
	workers      int
	writeQueries string
}

func newEvalCmd() *cobra.Command {
	var o evalOptions
	cmd := &cobra.Command{
		Use:   "eval [--condition C[,C…]|all] [--seed N --worlds W | --seeds 1,2,3] [--json] [--plot FILE.png] [--fit]",
		Short: "Measure direct, chained and routed answers against exact truth on synthetic worlds",
		Long: `eval generates random Bayesian-network worlds (100 binary variables, 100
edges, 30 held-out pairs by default), writes each world's corpus of contexts
as JSONL, builds a locality index with the real builder, and answers every
held-out pair (never observed together) and every supported pair (a network
edge), in both directions and for every value of the observed entity,
through the real router and scorer. It reports, per world and as a mean per
condition, the MSE against exact truth (variable elimination) of:

  direct        the pair's own posterior mean
  chain         the best chain the router found (direct when none)
  routed        what the router chose
  ideal         a chain through the true minimal separator path
  negative      a chain through random bridges, as many as the ideal path
                (at least one)
  support_only  the chain whose smallest edge support is largest (bridges
                chosen by support alone, not by scored error)
  marginal      the target's marginal in the index, whatever the observed
                value
  count_chain   the chain of fewest bridges, widest support among those

MSE per query is Σ_v (p̂_v − p_v)² / K over the target's K values, averaged
over the queries of a set. Calibration compares the router's predicted error
of its chosen answer with the realised squared error: Spearman ρ and the
ratio of means.

Conditions: local-geometric, local-zipf, full, wrong (comma-separated, or
all). Seeds: --seeds 1,2,3, or --seed N --worlds W for N … N+W−1.

--fit calibrates instead, on the worlds of --fit-seeds (which must not
overlap the evaluation seeds): the prior strength A of the direct estimate
(how far the held-out pairs' conditionals lie from the target's marginal),
the Bayes model's chain bias β·m + γ·(δ − L)₊² (for each δ of a grid, the
fixed point of scorer.FitChainBias on the chains the router answers with; δ
is the one with the best Spearman ρ on the fit worlds), the gain margin k
(the grid value with the smallest routed MSE) and the support model's v0,
n0, β (scorer.FitSupport).

--values, --cpt-alpha and --max-parents shape the generated networks: K
values per variable, Beta(a, a) (binary) or Dirichlet(a, …, a) rows of
every conditional table (smaller a: more nearly deterministic tables) and
at most P parents per variable. Each takes one value or a comma-separated
list; with a list, world i (in seed order) uses entry i modulo the list's
length, so "--values 2,3,4 --cpt-alpha 0.2,0.5,1" alternates three kinds of
network over the seeds (also for --fit).

--write-queries DIR keeps, for the first world, DIR/corpus.jsonl,
DIR/index.hwx, DIR/queries.jsonl (input of "hopwise route --queries") and
DIR/truth.jsonl (the exact answers by id).`,
		Example: `  hopwise eval
  hopwise eval --condition all --seed 1 --worlds 5 --plot eval.png
  hopwise eval --seeds 1,2,3 --json > eval.json
  hopwise eval --values 3 --cpt-alpha 0.5 --max-parents 3 --vars 40 --edges 60 --held-out 40 --seeds 1,2,3
  hopwise eval --fit --fit-seeds 101,102,103,104,105`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error { return runEval(cmd, o) },
	}
	def := world.EvalConfig()
	f := cmd.Flags()
	f.StringVar(&o.conditions, "condition", eval.DefaultCondition, "world condition(s): "+strings.Join(world.ConditionNames(), ", ")+", or all")
	f.Int64Var(&o.seed, "seed", 1, "first world seed")
	f.IntVar(&o.worlds, "worlds", 1, "number of worlds (seeds --seed … --seed+worlds−1)")
	f.StringVar(&o.seeds, "seeds", "", "comma-separated world seeds (overrides --seed/--worlds)")
	f.IntVar(&o.contexts, "contexts", eval.DefaultContexts, "contexts per corpus")
	f.IntVar(&o.vars, "vars", def.Vars, "variables per world")
	f.IntVar(&o.edges, "edges", def.Edges, "directed edges per world")
	f.IntVar(&o.heldOut, "held-out", def.HeldOut, "held-out pairs per world")
	f.StringVar(&o.values, "values", "2", fmt.Sprintf("K: values per variable (2..%d), or a list cycled over the worlds", world.MaxValues))
	f.StringVar(&o.cptAlpha, "cpt-alpha", "0.2", "a: Beta(a, a) / Dirichlet(a) concentration of the conditional tables (finite, > 0), or a list")
	f.StringVar(&o.maxParents, "max-parents", "0", "P: most parents per variable (0: no cap), or a list")
	f.BoolVar(&o.json, "json", false, "print the JSON summary instead of the table")
	f.StringVar(&o.plot, "plot", "", "write a PNG bar chart of the per-condition means")
	f.BoolVar(&o.fit, "fit", false, "fit β and the support-model constants instead of evaluating")
	f.StringVar(&o.fitSeeds, "fit-seeds", "101,102,103,104,105", "world seeds for --fit")
	f.Float64Var(&o.beta, "beta", router.DefaultConfig().Beta, "per-hop squared bias β of the Bayes model")
	f.Float64Var(&o.hopAlpha, "hop-alpha", scorer.DefaultHopAlpha, "Dirichlet pseudo-count of a chain's hop tables")
	f.Float64Var(&o.prior, "prior-strength", scorer.DefaultPriorStrength, "A: pseudo-count of the direct estimate's prior centred on the target's marginal")
	f.Float64Var(&o.spread, "unseen-spread", scorer.DefaultUnseenSpread, "η: a never-seen pair's direct error is η·(1 − P(observed value))²·(1 − 1/K)")
	f.Float64Var(&o.separation, "separation", scorer.DefaultSeparation, "λ: weight of the chain's separation bias (0: off)")
	f.Float64Var(&o.noiseK, "noise-k", scorer.DefaultNoiseK, "k: a chain must beat direct by k standard errors of its bias estimate (0: off)")
	f.Float64Var(&o.influence, "influence", scorer.DefaultInfluence, "κ: weight of the influence bound on an unobserved pair's error (0: off)")
	f.IntVar(&o.maxBridges, "max-bridges", router.DefaultMaxBridges, "H: most bridges in a chain (1-3)")
	f.IntVar(&o.beam, "beam", router.DefaultBeam, "B: router beam width")
	f.IntVar(&o.fanOut, "fan-out", router.DefaultFanOut, "f: second-layer neighbours per first-layer node")
	f.IntVar(&o.candidates, "max-candidates", router.DefaultMaxCandidates, "k: chains the router scores exactly")
	f.Float64Var(&o.gainTau, "gain-threshold", router.DefaultGainThreshold, "τ_gain of the router")
	f.BoolVar(&o.parallel, "parallel-bridges", router.DefaultParallelBridges, "let the router's parallel answer through two bridges compete (docs/QUALITY.md §4e)")
	workersFlag(f, &o.workers, "goroutines answering queries")
	f.StringVar(&o.writeQueries, "write-queries", "", "keep the first world's corpus, index, queries and truth in DIR")
	return cmd
}

func parseSeeds(s string) ([]int64, error) {
	var out []int64
	for _, part := range strings.Split(s, ",") {
		part = strings.TrimSpace(part)
		if part == "" {
			continue
		}
		n, err := strconv.ParseInt(part, 10, 64)
		if err != nil {
			return nil, fmt.Errorf("bad seed %q: %w", part, err)
		}
		if slices.Contains(out, n) {
			return nil, fmt.Errorf("seed %d listed twice", n)
		}
		out = append(out, n)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("no seeds in %q", s)
	}
	return out, nil
}

func runEval(cmd *cobra.Command, o evalOptions) error {
	var err error
	if o.workers, err = resolveWorkers(o.workers); err != nil {
		return fmt.Errorf("eval: %w", err)
	}
	ctx := cmd.Context()
	out := cmd.OutOrStdout()
	conds := strings.Split(o.conditions, ",")
	if o.conditions == "all" {
		conds = world.ConditionNames()
	}
	for i, c := range conds {
		conds[i] = strings.TrimSpace(c)
		if _, err := world.ConditionByName(conds[i]); err != nil {
			return fmt.Errorf("--condition: %w", err)
		}
	}
	var seeds []int64
	if cmd.Flags().Changed("seeds") {
		var err error
		if seeds, err = parseSeeds(o.seeds); err != nil {
			return fmt.Errorf("--seeds: %w", err)
		}
	} else {
		if o.worlds < 1 {
			return fmt.Errorf("--worlds: must be ≥ 1, got %d", o.worlds)
		}
		for i := range o.worlds {
			seeds = append(seeds, o.seed+int64(i))
		}
	}
	if o.contexts < 1 {
		return fmt.Errorf("--contexts: must be ≥ 1, got %d", o.contexts)
	}
	worlds, err := o.worldConfigs()
	if err != nil {
		return err
	}
	beta := o.beta
	base := eval.Config{
		World: &worlds[0], Contexts: o.contexts, Beta: &beta, MaxBridges: o.maxBridges, Workers: o.workers,
		ModelOptions: []scorer.Option{
			scorer.WithHopAlpha(o.hopAlpha), scorer.WithPriorStrength(o.prior), scorer.WithUnseenSpread(o.spread), scorer.WithSeparation(o.separation), scorer.WithNoiseK(o.noiseK), scorer.WithInfluence(o.influence),
		},
		RouterOptions: []router.Option{
			router.WithBeam(o.beam), router.WithFanOut(o.fanOut), router.WithMaxCandidates(o.candidates), router.WithGainThreshold(o.gainTau),
			router.WithParallelBridges(o.parallel),
		},
	}
	if o.maxBridges < 1 || o.maxBridges > router.MaxBridgesLimit {
		return fmt.Errorf("--max-bridges: must be in 1..%d, got %d", router.MaxBridgesLimit, o.maxBridges)
	}
	if o.fanOut < 1 || o.fanOut > 1<<20 { // router.Config's range for fan_out, 0 (the default) left out
		return fmt.Errorf("--fan-out: must be in 1..%d, got %d", 1<<20, o.fanOut)
	}

	if o.fit {
		fitSeeds, err := parseSeeds(o.fitSeeds)
		if err != nil {
			return fmt.Errorf("--fit-seeds: %w", err)
		}
		if cmd.Flags().Changed("seeds") || cmd.Flags().Changed("seed") || cmd.Flags().Changed("worlds") {
			for _, s := range fitSeeds {
				if slices.Contains(seeds, s) {
					return fmt.Errorf("--fit-seeds: seed %d is also an evaluation seed; fit and evaluate on different worlds", s)
				}
			}
		}
		if len(conds) != 1 {
			return fmt.Errorf("--fit: give one --condition")
		}
		base.Condition = conds[0]
		fr, err := eval.Fit(ctx, eval.FitConfig{Base: base, Seeds: fitSeeds, Worlds: worlds, StartBeta: &beta,
			Log: func(format string, args ...any) { fmt.Fprintf(cmd.ErrOrStderr(), format+"\n", args...) }})
		if err != nil {
			return networkFlags(err)
		}
		if o.json {
			enc := json.NewEncoder(out)
			enc.SetIndent("", "  ")
			return enc.Encode(fr)
		}
		fmt.Fprintf(out, "fitted on %s worlds, seeds %v (%d contexts each; values %s, cpt-alpha %s, max-parents %s)\n", fr.Condition, fr.Seeds, o.contexts, o.values, o.cptAlpha, o.maxParents)
		fmt.Fprintf(out, "bayes   A  = %.6g  η = %.6g   (direct prior strength and unseen-pair spread, %d unobserved-pair queries)\n", fr.PriorStrength, fr.UnseenSpread, fr.PriorSamples)
		fmt.Fprintf(out, "bayes   β  = %.6g  γ = %.6g  δ = %.6g   (fixed point β %v, γ %v, %d chains)\n",
			fr.Beta, fr.Gamma, fr.Delta, fr.BetaPath, fr.GammaPath, fr.ChainSamples)
		for _, g := range fr.Grid {
			fmt.Fprintf(out, "        δ = %-6g β = %.6g  γ = %.6g  fit-world ρ %.4f  mean ratio %.3f\n", g.Delta, g.Beta, g.Gamma, g.Spearman, g.MeanRatio)
		}
		fmt.Fprintf(out, "bayes   k  = %.6g   (gain margin)\n", fr.NoiseK)
		for _, g := range fr.NoiseGrid {
			fmt.Fprintf(out, "        k = %-4g routed MSE all %.6g  held-out %.6g  supported %.6g  (%.2f%% of supported chained)\n",
				g.K, g.All, g.HeldOut, g.Supported, 100*g.SupportedChainShare)
		}
		fmt.Fprintf(out, "support v0 = %.6g  n0 = %.6g  β = %.6g   (RMSE %.4g, %d samples)\n",
			fr.Support.V0, fr.Support.N0, fr.Support.Beta, fr.Support.RMSE, fr.Support.N)
		return nil
	}

	var reports []eval.Report
	for ci, c := range conds {
		for si, s := range seeds {
			cfg := base
			cfg.Condition, cfg.Seed = c, s
			cfg.World = &worlds[si%len(worlds)]
			if ci == 0 && si == 0 && o.writeQueries != "" {
				cfg.Dir = o.writeQueries
			}
			r, err := eval.Run(ctx, cfg)
			if err != nil {
				return networkFlags(err)
			}
			reports = append(reports, r)
			if !o.json {
				fmt.Fprintf(cmd.ErrOrStderr(), "%s seed %d: built in %.2fs, answered in %.2fs\n", c, s, r.BuildSeconds, r.AnswerSeconds)
			}
		}
	}
	sum := eval.Summarize(reports)
	if o.plot != "" {
		if err := sum.WritePlot(o.plot); err != nil {
			return err
		}
	}
	if o.json {
		enc := json.NewEncoder(out)
		enc.SetIndent("", "  ")
		return enc.Encode(sum)
	}
	if err := sum.WriteTable(out); err != nil {
		return err
	}
	if o.plot != "" {
		fmt.Fprintf(out, "plot: %s\n", filepath.Clean(o.plot))
	}
	return nil
}

// worldConfigs returns the network configurations of --vars, --edges,
// --held-out, --values, --cpt-alpha and --max-parents: one per entry of the
// longest list (world i uses entry i modulo its list's length). Every entry
// is checked here, so that a bad value is reported with its flag before any
// world is built: K in 2..world.MaxValues, a finite > 0, P ≥ 0, the edges
// placeable under P, and no conditional table beyond world.MaxCPTCells.
func (o evalOptions) worldConfigs() ([]world.Config, error) {
	if o.vars < 2 || o.edges < 0 || o.heldOut < 0 {
		return nil, fmt.Errorf("--vars ≥ 2, --edges ≥ 0 and --held-out ≥ 0 required")
	}
	ks, err := parseList("--values", o.values, strconv.Atoi)
	if err != nil {
		return nil, err
	}
	as, err := parseList("--cpt-alpha", o.cptAlpha, func(s string) (float64, error) { return strconv.ParseFloat(s, 64) })
	if err != nil {
		return nil, err
	}
	ps, err := parseList("--max-parents", o.maxParents, strconv.Atoi)
	if err != nil {
		return nil, err
	}
	n := max(len(ks), len(as), len(ps))
	out := make([]world.Config, n)
	for i := range out {
		k, a, p := ks[i%len(ks)], as[i%len(as)], ps[i%len(ps)]
		if k < 2 || k > world.MaxValues {
			return nil, fmt.Errorf("--values: K must be in 2..%d, got %d", world.MaxValues, k)
		}
		if !(a > 0) || math.IsInf(a, 0) {
			return nil, fmt.Errorf("--cpt-alpha: the concentration must be finite and > 0, got %v", a)
		}
		if p < 0 {
			return nil, fmt.Errorf("--max-parents: must be ≥ 0 (0: no cap), got %d", p)
		}
		wc := world.EvalConfig()
		wc.Vars, wc.Edges, wc.HeldOut = o.vars, o.edges, o.heldOut
		if o.edges == 0 {
			wc.Edges = -1 // world.Config: negative means no edges
		}
		wc.Values, wc.CPTAlpha, wc.CPTBeta, wc.MaxParents = k, a, a, p
		if m := world.MaxEdges(o.vars, p); o.edges > m {
			return nil, fmt.Errorf("--edges: %d directed edges exceed the %d possible for %d variables with --max-parents %d", o.edges, m, o.vars, p)
		}
		if p > 0 && !world.CPTFits(k, p) {
			return nil, fmt.Errorf("--values %d with --max-parents %d: a variable's conditional table of %d^%d cells would exceed %d; lower one of them", k, p, k, p+1, world.MaxCPTCells)
		}
		out[i] = wc
	}
	return out, nil
}

// networkFlags names the flags behind a network the world generator
// refused (world.ErrInvalidConfig: for example a variable drew so many
// parents that its table would not fit, which only generation can tell
// without --max-parents); other errors are returned as they are.
func networkFlags(err error) error {
	if errors.Is(err, world.ErrInvalidConfig) {
		return fmt.Errorf("%w (the network is set by --vars, --edges, --held-out, --values, --cpt-alpha and --max-parents)", err)
	}
	return err
}

// parseList parses a comma-separated list of values of flag (at least one);
// errors name the flag and the bad entry.
func parseList[T any](flag, s string, parse func(string) (T, error)) ([]T, error) {
	var out []T
	for _, part := range strings.Split(s, ",") {
		part = strings.TrimSpace(part)
		if part == "" {
			return nil, fmt.Errorf("%s: empty entry in %q", flag, s)
		}
		v, err := parse(part)
		if err != nil {
			return nil, fmt.Errorf("%s: bad value %q", flag, part)
		}
		out = append(out, v)
	}
	return out, nil
}
