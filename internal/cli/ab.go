package cli

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"github.com/hopwise/hopwise/internal/abreport"
	"github.com/hopwise/hopwise/internal/abstat"
	"github.com/hopwise/hopwise/internal/traceset"
	"github.com/hopwise/hopwise/router"
)

func init() { register(newABCmd) }

// abOptions are the flags of `hopwise ab`.
type abOptions struct {
	traces     []string
	outcomes   string
	json       bool
	allocation string
	config     string
	alpha      float64 // renamed; kept to say so
	abreport.Options
}

func newABCmd() *cobra.Command {
	o := abOptions{Options: abreport.DefaultOptions()}
	cmd := &cobra.Command{
		Use:   "ab [--traces] FILE... [--outcomes FILE.jsonl] [--control ARM] [--json] [flags]",
		Short: "Compare A/B arms (direct-only, routed, chain-always) from traces and outcomes",
		Long: `ab reads OTLP JSON Lines trace files written through the otelx package
(given with --traces, repeatable, or as arguments; a span read twice counts
once), joins each decision with its outcome by unit key (outcome spans in the
traces, or a plain outcomes file given with --outcomes, one JSON object per
line:
  {"unit":"unit-17","score":1,"input_tokens":812,"output_tokens":95,"latency_ms":640}
with unit and score in [0,1] required, token counts integers in [0, 2^40] and
latency_ms in [0, one week]), and compares the arms.

Per arm: decisions n, distinct units, mean outcome score, the success
proportion (score ≥ --success) with its Wilson interval, mean cost (tokens,
or tokens × --cost-per-token) and the share answered through a chain.

Each arm against the control (--control, default direct-only when present):
  success   difference of proportions with the Newcombe hybrid score interval
            (Newcombe 1998, method 10) and the pooled two-proportion z-test;
  score     difference of means with the Welch interval and a percentile
            bootstrap interval (--reps, --seed); when a unit key carries
            several decisions, the bootstrap resamples whole units and the
            report gives the design effect (its variance over that of
            resampling decisions);
  cost      difference of means with the Welch interval.
Every interval is at level --confidence, and a difference is called
significant when its interval excludes zero (two-sided test at level
1 − confidence).
Sample-ratio mismatch: a chi-square test of units per arm against the
allocation (--allocation routed=0.9,direct-only=0.1, or the arms of a router
--config file). Sample size: with --power P and --mde D, the decisions per arm
needed to detect a success difference D at the test level 1 − --confidence,
at the control's observed rate, and the power the current sizes give.

Decisions are the unit of analysis of the Welch, Newcombe and z figures
(treated as independent); units are what the allocation assigns and what the
bootstrap resamples when they repeat. Exit status: 0 on success, 1 on any error.`,
		Example: `  hopwise ab --traces traces.jsonl
  hopwise ab --traces day1.jsonl --traces day2.jsonl --outcomes outcomes.jsonl --allocation routed=0.5,direct-only=0.5
  hopwise ab day1.jsonl day2.jsonl --power 0.8 --mde 0.02 --json`,
		Args: cobra.ArbitraryArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			rep, err := runAB(cmd, o, args)
			if err != nil {
				return err
			}
			if o.json {
				enc := json.NewEncoder(cmd.OutOrStdout())
				enc.SetIndent("", "  ")
				return enc.Encode(rep)
			}
			return writeAB(cmd.OutOrStdout(), rep)
		},
	}
	traceFlags(cmd, &o.traces, &o.outcomes)
	f := cmd.Flags()
	f.BoolVar(&o.json, "json", false, "print the report as JSON")
	f.StringVar(&o.Control, "control", "", "control arm (default direct-only when present, else the first arm by name)")
	f.StringVar(&o.allocation, "allocation", "", "configured allocation for the SRM check, e.g. routed=0.9,direct-only=0.1")
	f.StringVar(&o.config, "config", "", "router config JSON whose arms give the allocation")
	f.Float64Var(&o.Success, "success", o.Success, "an outcome is a success when its score is ≥ this")
	f.Float64Var(&o.CostPerToken, "cost-per-token", 0, "price of one token; 0 reports cost in tokens")
	f.Float64Var(&o.Confidence, "confidence", o.Confidence, "confidence level of the intervals; 1 − confidence is the test level of the verdicts and of --power")
	f.IntVar(&o.Reps, "reps", o.Reps, "bootstrap replicates (0 disables the bootstrap interval)")
	f.Uint64Var(&o.Seed, "seed", o.Seed, "bootstrap seed")
	f.Float64Var(&o.Power, "power", 0, "target power for the sample-size helper (e.g. 0.8; 0 = off)")
	f.Float64Var(&o.MDE, "mde", 0, "minimum detectable difference in success proportion, for --power")
	f.Float64Var(&o.alpha, "alpha", 0, "renamed: the test level is 1 − --confidence")
	_ = f.MarkHidden("alpha")
	return cmd
}

// traceFlags declares --traces and --outcomes, shared by ab and tune.
func traceFlags(cmd *cobra.Command, traces *[]string, outcomes *string) {
	f := cmd.Flags()
	f.StringSliceVar(traces, "traces", nil, "OTLP JSON Lines trace file (repeat the flag, or give the files as arguments)")
	f.StringVar(outcomes, "outcomes", "", "plain outcomes JSONL file joined by unit (replaces outcome spans)")
}

// loadTraces reads the --traces files and the trace files given as
// arguments, joined with their outcomes.
func loadTraces(traces, args []string, outcomes string) (*traceset.Set, error) {
	files := append(slices.Clip(traces), args...)
	if len(files) == 0 {
		return nil, errors.New("--traces: at least one trace file is required (--traces FILE, repeatable, or the files as arguments)")
	}
	return traceset.Load(files, outcomes)
}

func runAB(cmd *cobra.Command, o abOptions, args []string) (*abreport.Report, error) {
	if cmd != nil && cmd.Flags().Changed("alpha") {
		return nil, fmt.Errorf("--alpha was renamed: the sample-size helper tests at level 1 − --confidence (give --confidence %v for α = %v)", 1-o.alpha, o.alpha)
	}
	if err := o.Validate(); err != nil {
		return nil, err
	}
	switch {
	case o.allocation != "" && o.config != "":
		return nil, errors.New("give --allocation or --config, not both")
	case o.allocation != "":
		a, err := parseAllocation(o.allocation)
		if err != nil {
			return nil, err
		}
		o.Allocation = a
	case o.config != "":
		c, err := router.LoadConfig(o.config)
		if err != nil {
			return nil, err
		}
		if len(c.Arms) < 2 {
			return nil, fmt.Errorf("%s: the config has %d arms; the SRM check needs at least two", o.config, len(c.Arms))
		}
		o.Allocation = map[string]float64{}
		for _, a := range c.Arms {
			o.Allocation[a.Arm] = a.Weight
		}
	}
	set, err := loadTraces(o.traces, args, o.outcomes)
	if err != nil {
		return nil, err
	}
	return abreport.Compare(set, o.Options)
}

// parseAllocation reads "arm=w,arm=w".
func parseAllocation(s string) (map[string]float64, error) {
	out := map[string]float64{}
	for _, part := range strings.Split(s, ",") {
		part = strings.TrimSpace(part)
		if part == "" {
			continue
		}
		name, w, ok := strings.Cut(part, "=")
		if !ok {
			return nil, fmt.Errorf("--allocation: %q is not arm=weight", part)
		}
		v, err := strconv.ParseFloat(strings.TrimSpace(w), 64)
		if err != nil || !(v >= 0) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("--allocation: arm %q: weight %q is not a finite number ≥ 0", name, w)
		}
		name = strings.TrimSpace(name)
		if _, dup := out[name]; dup {
			return nil, fmt.Errorf("--allocation: arm %q given twice", name)
		}
		out[name] = v
	}
	if len(out) < 2 {
		return nil, fmt.Errorf("--allocation: need at least two arms, got %q", s)
	}
	return out, nil
}

// writeRead prints what was read and joined.
func writeRead(w io.Writer, s *traceset.Set) {
	fmt.Fprintf(w, "read %d file(s): %d decisions (%d failed), %d outcome spans", len(s.Files), s.Stats.Decisions, s.Stats.FailedDecisions, s.Stats.Outcomes)
	if s.Stats.DuplicateSpans > 0 {
		fmt.Fprintf(w, ", %d duplicate spans dropped (same trace and span id read before)", s.Stats.DuplicateSpans)
	}
	fmt.Fprintf(w, "; outcomes from %s\n", s.OutcomeSource)
	fmt.Fprintf(w, "joined %d decisions with outcomes; %d without outcome, %d without key, %d outcomes without decision\n",
		s.Join.Joined, s.Join.DecisionsWithoutOutcome, s.Join.DecisionsWithoutKey, s.Join.OutcomesWithoutDecision)
	if s.Ignored > 0 {
		fmt.Fprintf(w, "%d outcome spans in the traces were ignored in favour of %s\n", s.Ignored, s.OutcomeSource)
	}
}

func fmtIv(iv abstat.Interval) string {
	return fmt.Sprintf("%+.4f [%+.4f, %+.4f]", iv.Est, iv.Lo, iv.Hi)
}

func writeAB(w io.Writer, r *abreport.Report) error {
	writeRead(w, r.Set)
	fmt.Fprintln(w)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	pct := int(math.Round(100 * r.Confidence))
	fmt.Fprintf(tw, "arm\tn\tunits\tmean score\tsuccess (score ≥ %g) [%d%% Wilson]\tmean cost (%s)\tchain share\n", r.SuccessAt, pct, r.CostUnit)
	for _, a := range r.Arms {
		name := a.Arm
		if a.Control {
			name += " (control)"
		}
		fmt.Fprintf(tw, "%s\t%d\t%d\t%.4f\t%.4f [%.4f, %.4f]\t%.4g\t%.3f\n", name, a.N, a.Units, a.MeanScore, a.Success.Est, a.Success.Lo, a.Success.Hi, a.MeanCost, a.ChainShare)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	for _, d := range r.Diffs {
		fmt.Fprintf(w, "\n%s − %s (%d%% intervals):\n", d.Arm, d.Control, pct)
		verdict := "no significant difference"
		if d.Significant {
			verdict = "significant"
		}
		fmt.Fprintf(w, "  success  %s  Newcombe hybrid score; pooled z = %.3f, p = %.3g — %s\n", fmtIv(d.Success), d.Z.Z, d.Z.P, verdict)
		if d.Score != nil {
			fmt.Fprintf(w, "  score    %s  Welch (df %.1f, p = %.3g)\n", fmtIv(d.Score.Interval), d.Score.DF, d.Score.P)
		}
		if d.ScoreBoot != nil && d.BootByUnit {
			fmt.Fprintf(w, "  score    %s  percentile bootstrap over units (design effect %.2f)\n", fmtIv(*d.ScoreBoot), d.DesignEffect)
		} else if d.ScoreBoot != nil {
			fmt.Fprintf(w, "  score    %s  percentile bootstrap\n", fmtIv(*d.ScoreBoot))
		}
		if d.Cost != nil {
			fmt.Fprintf(w, "  cost     %+.4g [%+.4g, %+.4g] %s  Welch (p = %.3g)\n", d.Cost.Est, d.Cost.Lo, d.Cost.Hi, r.CostUnit, d.Cost.P)
		}
	}
	if s := r.SRM; s != nil {
		fmt.Fprintf(w, "\nsample ratio: χ² = %.3f, df %d, p = %.3g over units", s.ChiSq, s.DF, s.P)
		for i, a := range s.Arms {
			fmt.Fprintf(w, "; %s %d (expected %.1f)", a, s.Units[i], s.Expected[i])
		}
		if s.Mismatch {
			fmt.Fprintln(w, "\n  SAMPLE RATIO MISMATCH (p < 0.001): the assignment or the logging is broken; do not trust the comparison")
		} else {
			fmt.Fprintln(w, " — consistent with the allocation")
		}
	}
	if p := r.Power; p != nil {
		fmt.Fprintf(w, "\nsample size: %d decisions per arm detect a success difference of %.4g from %.4f with power %.2f at α = %.3g (normal approximation); "+
			"the smallest arm has %d, giving power %.3f\n", p.NeededPer, p.MDE, p.Baseline, p.Target, p.Alpha, p.CurrentMin, p.Achieved)
	}
	for _, n := range r.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	return nil
}
