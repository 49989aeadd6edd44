package cli

import (
	"encoding/json"
	"errors"
	"fmt"
	"github.com/hopwise/hopwise/graphidx"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"github.com/hopwise/hopwise/internal/abstat"
	"github.com/hopwise/hopwise/internal/tuner"
	"github.com/hopwise/hopwise/router"
)

func init() { register(newTuneCmd) }

// tuneOptions are the flags of `hopwise tune`.
type tuneOptions struct {
	traces     []string
	outcomes   string
	out        string
	plotDir    string
	base       string
	json       bool
	taus       string
	maxBridges string
	tuner.Options
}

// tuneExitNone is the exit status of `hopwise tune` when no candidate
// policy has a supported estimate (0: a recommendation, change or keep,
// was made; 1: an error).
const tuneExitNone = 2

func newTuneCmd() *cobra.Command {
	o := tuneOptions{Options: tuner.DefaultOptions()}
	cmd := &cobra.Command{
		Use:   "tune [--traces] FILE... [--outcomes FILE.jsonl] [--base deployed.json] --out config.json [flags]",
		Short: "Choose the gain threshold τ and max bridges H by off-policy evaluation of traces",
		Long: `tune reads OTLP JSON Lines traces written through the otelx package (given
with --traces, repeatable, or as arguments; a span read twice counts once),
joins the decisions with their outcomes by unit key (outcome spans, or
--outcomes FILE.jsonl in the format "hopwise ab --help" shows), and
estimates, for each candidate policy "chain when score ≥ τ and the chain has
at most H bridges, else direct", the value it would have had:

  IPS     inverse propensity scoring,
  SNIPS   self-normalised IPS,
  DR      doubly robust, with a binned per-mode outcome model fitted on the logs
          and cross-fitted over --folds folds,

each with a percentile (Poisson) bootstrap interval at level --confidence,
the cost estimated the same way, and the effective sample size. Decisions
are weighted by 1/hopwise.sampling.ratio. Only decisions of the routed policy
are used (arm --arm, or no arm; reasons gain-above/below-threshold, no-chain,
explore): other arms and fallbacks are counted and left out.

The logging router must explore (router exploration ε > 0) and the spans must
carry hopwise.route.propensity: without propensities tune refuses. A policy
that would need a mode the logger took with probability below --floor, or
whose effective sample size is below --min-ess, gets no estimate and says why.

The objective is the outcome score, or with --objective score-cost the score
minus tokens × --cost-per-token. The current setting is the --base config
(the one deployed), or without it the router defaults with the exploration
rate and A/B arms read off the logged decisions. tune recommends the best
policy by --estimator only when its improvement over the current setting,
on paired bootstrap replicates, has an interval that excludes zero;
otherwise it says to keep the current setting, and why.

--out receives the configuration to run: the current one with the
recommended τ and H (or unchanged when keeping). It holds τ, H, the
exploration rate and every field that differs from the router defaults
(arms, hash key, fitted constants of --base); defaults are left out so the
router's own apply. --plot-dir DIR adds value-vs-τ and calibration PNGs.
The decision ("change" or "keep") is the first word after "recommended:"
and the "decision" field of --json. Exit status: 0 with a recommendation
(change or keep; config written), 2 when no policy can be supported (no
config written), 1 on errors.`,
		Example: `  hopwise tune --traces traces.jsonl --base deployed.json --out tuned.json
  hopwise tune --traces day1.jsonl --traces day2.jsonl --outcomes outcomes.jsonl --objective score-cost --cost-per-token 2e-6 --out tuned.json --plot-dir plots/
  hopwise tune day1.jsonl day2.jsonl --max-bridges 1,2 --out tuned.json`,
		Args: cobra.ArbitraryArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			rep, err := runTune(o, args)
			if err != nil {
				return err
			}
			out := cmd.OutOrStdout()
			if o.json {
				enc := json.NewEncoder(out)
				enc.SetIndent("", "  ")
				if err := enc.Encode(rep); err != nil {
					return err
				}
			} else if err := writeTune(out, rep); err != nil {
				return err
			}
			if rep.Decision == tuner.None {
				return &ExitError{Code: tuneExitNone, Err: errors.New("tune: no candidate policy has a supported estimate; no config written")}
			}
			return nil
		},
	}
	traceFlags(cmd, &o.traces, &o.outcomes)
	f := cmd.Flags()
	f.StringVar(&o.Objective, "objective", o.Objective, "score or score-cost")
	f.Float64Var(&o.CostPerToken, "cost-per-token", 0, "price of one token (needed by score-cost; 0 reports cost in tokens)")
	f.StringVar(&o.out, "out", "", "write the router config to run here")
	f.StringVar(&o.plotDir, "plot-dir", "", "directory for value.png and calibration.png")
	f.StringVar(&o.plotDir, "plots", "", "directory for the plots")
	_ = f.MarkDeprecated("plots", "use --plot-dir")
	f.StringVar(&o.base, "base", "", "the deployed router config: the current setting, whose other fields the written config keeps (default: router defaults, with ε and arms from the logs)")
	f.BoolVar(&o.json, "json", false, "print the report as JSON")
	f.StringVar(&o.taus, "taus", "", "comma-separated τ grid (default: --tau-points quantiles of the logged scores)")
	f.IntVar(&o.TauPoints, "tau-points", o.TauPoints, "size of the automatic τ grid")
	f.StringVar(&o.maxBridges, "max-bridges", "", "comma-separated grid of max_bridges H (default 1..max_bridges of the current setting)")
	f.StringVar(&o.maxBridges, "max-hops", "", "grid of max_bridges")
	_ = f.MarkDeprecated("max-hops", "use --max-bridges")
	f.StringVar(&o.Estimator, "estimator", o.Estimator, "estimator that picks the recommendation: dr, snips or ips")
	f.Float64Var(&o.Floor, "floor", o.Floor, "smallest logging probability of a target mode")
	f.Float64Var(&o.MinESS, "min-ess", o.MinESS, "smallest effective sample size for an estimate")
	f.IntVar(&o.Folds, "folds", o.Folds, "cross-fitting folds of the DR outcome model (1 fits it in-sample)")
	f.IntVar(&o.Reps, "reps", o.Reps, "bootstrap replicates")
	f.Uint64Var(&o.Seed, "seed", o.Seed, "bootstrap seed")
	f.Float64Var(&o.Confidence, "confidence", o.Confidence, "confidence level of the intervals and of the change/keep rule")
	f.StringVar(&o.Arm, "arm", o.Arm, "A/B arm whose decisions follow the routed policy")
	return cmd
}

func parseFloats(s, flag string) ([]float64, error) {
	var out []float64
	for _, p := range strings.Split(s, ",") {
		if p = strings.TrimSpace(p); p == "" {
			continue
		}
		v, err := strconv.ParseFloat(p, 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("%s: %q is not a finite number", flag, p)
		}
		out = append(out, v)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("%s: empty list", flag)
	}
	return out, nil
}

// runTune parses the list flags and the base config, runs the tuner and
// writes the config and plots it asks for.
func runTune(o tuneOptions, args []string) (*tuner.Report, error) {
	if err := o.Validate(); err != nil {
		return nil, err
	}
	if o.base != "" {
		c, err := router.LoadConfig(o.base)
		if err != nil {
			return nil, err
		}
		o.Base = &c
	}
	if o.maxBridges != "" {
		fs, err := parseFloats(o.maxBridges, "--max-bridges")
		if err != nil {
			return nil, err
		}
		for _, f := range fs {
			if f != math.Trunc(f) || f < 0 || f > router.MaxBridgesLimit {
				return nil, fmt.Errorf("--max-bridges: %v is not an integer in [0, %d]", f, router.MaxBridgesLimit)
			}
			o.MaxBridges = append(o.MaxBridges, int(f))
		}
	}
	if o.taus != "" {
		ts, err := parseFloats(o.taus, "--taus")
		if err != nil {
			return nil, err
		}
		o.Taus = ts
	}
	if o.out != "" {
		if err := graphidx.CheckOutput(o.out); err != nil {
			return nil, fmt.Errorf("--out: %w", err)
		}
	}
	set, err := loadTraces(o.traces, args, o.outcomes)
	if err != nil {
		return nil, err
	}
	rep, err := tuner.Run(set, o.Options)
	if err != nil {
		return nil, err
	}
	if rep.Config != nil && o.out != "" {
		if err := tuner.WriteConfig(o.out, *rep.Config); err != nil {
			return nil, fmt.Errorf("--out %s: %w", o.out, err)
		}
		rep.ConfigFile = o.out
	}
	if o.plotDir != "" {
		if rep.Plots, err = tuner.WritePlots(o.plotDir, rep); err != nil {
			return nil, fmt.Errorf("--plot-dir %s: %w", o.plotDir, err)
		}
	}
	return rep, nil
}

func writeTune(w io.Writer, r *tuner.Report) error {
	writeRead(w, r.Set)
	fmt.Fprintf(w, "%d follow the routed policy", r.Used)
	if len(r.Excluded) > 0 {
		keys := slices.Sorted(func(yield func(string) bool) {
			for k := range r.Excluded {
				if !yield(k) {
					return
				}
			}
		})
		fmt.Fprint(w, "; left out:")
		for _, k := range keys {
			fmt.Fprintf(w, " %s %d", k, r.Excluded[k])
		}
	}
	fmt.Fprintf(w, "\nobjective %s, cost in %s; intervals: %g%% percentile bootstrap\n\n", r.Objective, r.CostUnit, 100*r.Confidence)
	taus := make([]float64, len(r.Policies))
	for i, p := range r.Policies {
		taus[i] = p.Tau
	}
	tauText := tuner.FormatTaus(taus)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	est := strings.ToUpper(r.Estimator)
	fmt.Fprintf(tw, "τ\tH\tchain share\tESS\tIPS value\tSNIPS value\tDR value\tDR cost\t%s vs current\n", est)
	iv := func(i abstat.Interval) string { return fmt.Sprintf("%.4f [%.4f, %.4f]", i.Est, i.Lo, i.Hi) }
	for i := range r.Policies {
		p := &r.Policies[i]
		mark := ""
		if p.Current {
			mark += " (current)"
		}
		if p == r.Best {
			mark += " (best)"
		}
		if !p.Supported {
			fmt.Fprintf(tw, "%s\t%d\t%.3f\t%.1f\tno estimate: %s%s\n", tauText[i], p.MaxHops, p.ChainShare, p.ESS, p.Reason, mark)
			continue
		}
		vs := "-"
		if d, ok := p.Improvement(r.Estimator); ok {
			vs = fmt.Sprintf("%+.4f [%+.4f, %+.4f]", d.Est, d.Lo, d.Hi)
		}
		fmt.Fprintf(tw, "%s\t%d\t%.3f\t%.1f\t%s\t%s\t%s\t%.4g [%.4g, %.4g]\t%s%s\n", tauText[i], p.MaxHops, p.ChainShare, p.ESS,
			iv(p.IPS.Value), iv(p.SNIPS.Value), iv(p.DR.Value), p.DR.Cost.Est, p.DR.Cost.Lo, p.DR.Cost.Hi, vs, mark)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	switch r.Decision {
	case tuner.Change:
		e := r.Best.Pick(r.Estimator)
		fmt.Fprintf(w, "\nrecommended: change to gain_threshold %s, max_bridges %d (%s value %s, cost %.4g): %s\n",
			strconv.FormatFloat(r.Best.Tau, 'g', -1, 64), r.Best.MaxHops, est, iv(e.Value), e.Cost.Est, r.Why)
	case tuner.Keep:
		fmt.Fprintf(w, "\nrecommended: keep the current setting: %s\n", r.Why)
	default:
		fmt.Fprintf(w, "\nno recommendation: %s\n", r.Why)
	}
	if r.ConfigFile != "" {
		fmt.Fprintf(w, "config: %s\n", r.ConfigFile)
	}
	for _, p := range r.Plots {
		fmt.Fprintf(w, "plot: %s\n", p)
	}
	for _, n := range r.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	return nil
}
