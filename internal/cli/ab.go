package cli

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"github.com/hopwise/hopwise/internal/abstat"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
)

func init() { register(newABCmd) }

// abOptions are the flags of `hopwise ab`.
type abOptions struct {
	traces       []string
	outcomes     string
	json         bool
	control      string
	allocation   string
	config       string
	success      float64
	costPerToken float64
	conf         float64
	reps         int
	seed         uint64
	power        float64
	mde          float64
	alpha        float64
}

func newABCmd() *cobra.Command {
	o := abOptions{success: 0.5, conf: 0.95, reps: 2000, seed: 1, alpha: 0.05}
	cmd := &cobra.Command{
		Use:   "ab --traces PATH... [--outcomes FILE.jsonl] [--control ARM] [--json] [flags]",
		Short: "Compare A/B arms (direct-only, routed, chain-always) from traces and outcomes",
		Long: `ab reads OTLP JSON Lines trace files written through the otelx package,
joins each decision with its outcome by unit key (outcome spans in the traces,
or a plain outcomes file given with --outcomes, one JSON object per line:
  {"key":"unit-17","score":1,"input_tokens":812,"output_tokens":95,"latency_ms":640}
with key and score in [0,1] required), and compares the arms.

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
Sample-ratio mismatch: a chi-square test of units per arm against the
allocation (--allocation routed=0.9,direct-only=0.1, or the arms of a router
--config file). Sample size: with --power P and --mde D, the decisions per arm
needed to detect a success difference D at level --alpha, at the control's
observed rate, and the power the current sizes give.

Decisions are the unit of analysis of the Welch, Newcombe and z figures
(treated as independent); units are what the allocation assigns and what the
bootstrap resamples when they repeat. Exit status: 0 on success, 1 on any error.`,
		Example: `  hopwise ab --traces traces.jsonl
  hopwise ab --traces day1.jsonl day2.jsonl --outcomes outcomes.jsonl --allocation routed=0.5,direct-only=0.5
  hopwise ab --traces traces.jsonl --power 0.8 --mde 0.02 --json`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			rep, err := runAB(o)
			if err != nil {
				return err
			}
			if o.json {
				enc := json.NewEncoder(cmd.OutOrStdout())
				enc.SetIndent("", "  ")
				return enc.Encode(rep)
			}
			return rep.write(cmd.OutOrStdout())
		},
	}
	f := cmd.Flags()
	f.StringSliceVar(&o.traces, "traces", nil, "OTLP JSON Lines trace files (repeat or comma-separate)")
	f.StringVar(&o.outcomes, "outcomes", "", "plain outcomes JSONL file joined by key (replaces outcome spans)")
	f.BoolVar(&o.json, "json", false, "print the report as JSON")
	f.StringVar(&o.control, "control", "", "control arm (default direct-only when present, else the first arm by name)")
	f.StringVar(&o.allocation, "allocation", "", "configured allocation for the SRM check, e.g. routed=0.9,direct-only=0.1")
	f.StringVar(&o.config, "config", "", "router config JSON whose arms give the allocation")
	f.Float64Var(&o.success, "success", o.success, "an outcome is a success when its score is ≥ this")
	f.Float64Var(&o.costPerToken, "cost-per-token", 0, "price of one token; 0 reports cost in tokens")
	f.Float64Var(&o.conf, "confidence", o.conf, "confidence level of the intervals")
	f.IntVar(&o.reps, "reps", o.reps, "bootstrap replicates (0 disables the bootstrap interval)")
	f.Uint64Var(&o.seed, "seed", o.seed, "bootstrap seed")
	f.Float64Var(&o.power, "power", 0, "target power for the sample-size helper (e.g. 0.8; 0 = off)")
	f.Float64Var(&o.mde, "mde", 0, "minimum detectable difference in success proportion, for --power")
	f.Float64Var(&o.alpha, "alpha", o.alpha, "two-sided test level for --power")
	return cmd
}

// joinedData is what ab and tune read: decisions joined with outcomes.
type joinedData struct {
	Files         []string              `json:"files"`
	Stats         otelx.ReadStats       `json:"read"`
	Join          otelx.JoinStats       `json:"join"`
	OutcomeSource string                `json:"outcome_source"`
	Joined        []otelx.Joined        `json:"-"`
	Log           *otelx.Log            `json:"-"`
	Ignored       int                   `json:"ignored_trace_outcomes,omitempty"`
	Outcomes      []otelx.OutcomeRecord `json:"-"`
}

func loadJoined(traces []string, outcomes string) (*joinedData, error) {
	if len(traces) == 0 {
		return nil, errors.New("--traces: at least one trace file is required")
	}
	lg, err := otelx.ReadTraceFiles(traces...)
	if err != nil {
		return nil, err
	}
	jd := &joinedData{Files: traces, Stats: lg.Stats, Log: lg, OutcomeSource: "trace outcome spans"}
	outs := lg.Outcomes
	if outcomes != "" {
		outs, err = otelx.ReadOutcomeFile(outcomes)
		if err != nil {
			return nil, err
		}
		jd.OutcomeSource = outcomes
		jd.Ignored = len(lg.Outcomes)
	}
	jd.Outcomes = outs
	if len(lg.Decisions) == 0 {
		return nil, fmt.Errorf("no decision spans (%s) in %s", otelx.SpanDecide, strings.Join(traces, ", "))
	}
	jd.Joined, jd.Join = otelx.Join(lg.Decisions, outs)
	if len(jd.Joined) == 0 {
		return nil, fmt.Errorf("no decision could be joined with an outcome (%d decisions, %d outcomes from %s; %d decisions without key)",
			len(lg.Decisions), len(outs), jd.OutcomeSource, jd.Join.DecisionsWithoutKey)
	}
	return jd, nil
}

// cost of one outcome: tokens, or tokens × price.
func outcomeCost(o *otelx.OutcomeRecord, costPerToken float64) float64 {
	t := float64(o.Tokens())
	if costPerToken > 0 {
		return t * costPerToken
	}
	return t
}

type abArm struct {
	Arm        string          `json:"arm"`
	Control    bool            `json:"control"`
	N          int             `json:"n"`
	Units      int             `json:"units"`
	MeanScore  float64         `json:"mean_score"`
	ScoreSD    float64         `json:"score_sd"`
	Successes  int             `json:"successes"`
	Success    abstat.Interval `json:"success"` // Wilson
	MeanCost   float64         `json:"mean_cost"`
	ChainShare float64         `json:"chain_share"`

	scores, costs []float64
	byUnit        map[string][]float64 // scores per unit key
}

// unitClusters returns the arm's scores grouped by unit key, in key order.
func (a *abArm) unitClusters() [][]float64 {
	keys := make([]string, 0, len(a.byUnit))
	for k := range a.byUnit {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	out := make([][]float64, len(keys))
	for i, k := range keys {
		out[i] = a.byUnit[k]
	}
	return out
}

type abDiff struct {
	Arm       string              `json:"arm"`
	Control   string              `json:"control"`
	Success   abstat.Interval     `json:"success_diff"` // Newcombe hybrid score
	Z         abstat.ZTest        `json:"success_z"`
	Score     *abstat.WelchResult `json:"score_diff_welch,omitempty"`
	ScoreBoot *abstat.Interval    `json:"score_diff_bootstrap,omitempty"`
	// BootByUnit: units repeat, so the bootstrap resampled whole units
	// (their decisions may be correlated) rather than single decisions.
	BootByUnit bool `json:"score_bootstrap_by_unit,omitempty"`
	// DesignEffect is the variance ratio of the unit to the decision
	// bootstrap (1 when decisions are independent), set with BootByUnit.
	DesignEffect float64             `json:"score_design_effect,omitempty"`
	Cost         *abstat.WelchResult `json:"cost_diff_welch,omitempty"`
	Significant  bool                `json:"success_significant"`
}

type abSRM struct {
	Allocation map[string]float64 `json:"allocation"`
	abstat.SRMResult
	Arms     []string `json:"arms"`
	Units    []int    `json:"units"`
	Mismatch bool     `json:"mismatch"` // p < 0.001
}

type abPower struct {
	Target     float64 `json:"target_power"`
	MDE        float64 `json:"mde"`
	Alpha      float64 `json:"alpha"`
	Baseline   float64 `json:"baseline"`
	NeededPer  int     `json:"needed_per_arm"`
	CurrentMin int     `json:"current_min_n"`
	Achieved   float64 `json:"achieved_power"`
}

type abReport struct {
	*joinedData
	Confidence float64  `json:"confidence"`
	SuccessAt  float64  `json:"success_threshold"`
	CostUnit   string   `json:"cost_unit"`
	Control    string   `json:"control"`
	Arms       []abArm  `json:"arms"`
	Diffs      []abDiff `json:"diffs"`
	SRM        *abSRM   `json:"srm,omitempty"`
	Power      *abPower `json:"power,omitempty"`
	Notes      []string `json:"notes,omitempty"`
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
		out[strings.TrimSpace(name)] = v
	}
	if len(out) < 2 {
		return nil, fmt.Errorf("--allocation: need at least two arms, got %q", s)
	}
	return out, nil
}

func runAB(o abOptions) (*abReport, error) {
	if !(o.conf > 0 && o.conf < 1) {
		return nil, fmt.Errorf("--confidence %v: want a level in (0,1)", o.conf)
	}
	if !(o.success >= 0 && o.success <= 1) {
		return nil, fmt.Errorf("--success %v: want a score in [0,1]", o.success)
	}
	if o.costPerToken < 0 || math.IsNaN(o.costPerToken) {
		return nil, fmt.Errorf("--cost-per-token %v: want ≥ 0", o.costPerToken)
	}
	if o.reps < 0 {
		return nil, fmt.Errorf("--reps %d: want ≥ 0", o.reps)
	}
	if o.power != 0 && !(o.power > 0 && o.power < 1 && o.mde > 0 && o.mde < 1) {
		return nil, fmt.Errorf("--power %v with --mde %v: want power in (0,1) and mde in (0,1)", o.power, o.mde)
	}
	var alloc map[string]float64
	switch {
	case o.allocation != "" && o.config != "":
		return nil, errors.New("give --allocation or --config, not both")
	case o.allocation != "":
		a, err := parseAllocation(o.allocation)
		if err != nil {
			return nil, err
		}
		alloc = a
	case o.config != "":
		c, err := router.LoadConfig(o.config)
		if err != nil {
			return nil, err
		}
		if len(c.Arms) < 2 {
			return nil, fmt.Errorf("%s: the config has %d arms; the SRM check needs at least two", o.config, len(c.Arms))
		}
		alloc = map[string]float64{}
		for _, a := range c.Arms {
			alloc[a.Arm] = a.Weight
		}
	}

	jd, err := loadJoined(o.traces, o.outcomes)
	if err != nil {
		return nil, err
	}
	rep := &abReport{joinedData: jd, Confidence: o.conf, SuccessAt: o.success, CostUnit: "tokens"}
	if o.costPerToken > 0 {
		rep.CostUnit = "price"
	}

	byArm := map[string]*abArm{}
	units := map[string]map[string]bool{}
	ratios := map[float64]bool{}
	var chains = map[string]int{}
	for _, j := range jd.Joined {
		d, oc := j.Decision, j.Outcome
		a := byArm[d.Arm]
		if a == nil {
			a = &abArm{Arm: d.Arm, byUnit: map[string][]float64{}}
			byArm[d.Arm] = a
			units[d.Arm] = map[string]bool{}
		}
		a.N++
		units[d.Arm][d.Key] = true
		a.scores = append(a.scores, oc.Score)
		a.byUnit[d.Key] = append(a.byUnit[d.Key], oc.Score)
		a.costs = append(a.costs, outcomeCost(oc, o.costPerToken))
		if oc.Score >= o.success {
			a.Successes++
		}
		if d.Mode == "chain" {
			chains[d.Arm]++
		}
		ratios[d.SamplingRatio] = true
	}
	if _, ok := byArm[""]; ok {
		if len(byArm) == 1 {
			return nil, errors.New("the decisions carry no A/B arm (hopwise.ab.arm): configure the router's arms to run an experiment")
		}
		rep.Notes = append(rep.Notes, fmt.Sprintf("%d joined decisions without an arm are reported as arm \"\"", byArm[""].N))
	}
	if len(ratios) > 1 {
		rep.Notes = append(rep.Notes, "the traces mix several sampling ratios; arm comparisons are unweighted, which is exact only when every arm was sampled alike")
	}
	names := make([]string, 0, len(byArm))
	for k := range byArm {
		names = append(names, k)
	}
	slices.Sort(names)
	if len(names) < 2 {
		return nil, fmt.Errorf("only one arm (%q) has joined outcomes; an A/B comparison needs two", names[0])
	}
	rep.Control = o.control
	if rep.Control == "" {
		rep.Control = names[0]
		if _, ok := byArm[router.ArmDirectOnly]; ok {
			rep.Control = router.ArmDirectOnly
		}
	}
	if _, ok := byArm[rep.Control]; !ok {
		return nil, fmt.Errorf("--control %q: no joined decisions in that arm (arms: %s)", rep.Control, strings.Join(names, ", "))
	}
	// control first, then the others by name
	slices.SortStableFunc(names, func(a, b string) int {
		switch {
		case a == rep.Control:
			return -1
		case b == rep.Control:
			return 1
		}
		return strings.Compare(a, b)
	})
	for _, n := range names {
		a := byArm[n]
		a.Control = n == rep.Control
		a.Units = len(units[n])
		s := abstat.Summarize(a.scores)
		a.MeanScore, a.ScoreSD = s.Mean, math.Sqrt(s.Var)
		a.MeanCost = abstat.Summarize(a.costs).Mean
		a.ChainShare = float64(chains[n]) / float64(a.N)
		w, err := abstat.Wilson(a.Successes, a.N, o.conf)
		if err != nil {
			return nil, err
		}
		a.Success = w
		rep.Arms = append(rep.Arms, *a)
	}
	ctrl := byArm[rep.Control]
	for _, a := range rep.Arms[1:] {
		arm := byArm[a.Arm]
		d := abDiff{Arm: a.Arm, Control: rep.Control}
		if d.Success, err = abstat.NewcombeDiff(arm.Successes, arm.N, ctrl.Successes, ctrl.N, o.conf); err != nil {
			return nil, err
		}
		if d.Z, err = abstat.TwoProportionZ(arm.Successes, arm.N, ctrl.Successes, ctrl.N); err != nil {
			return nil, err
		}
		d.Significant = d.Success.Lo > 0 || d.Success.Hi < 0
		if arm.N >= 2 && ctrl.N >= 2 {
			w, err := abstat.Welch(abstat.Summarize(arm.scores), abstat.Summarize(ctrl.scores), o.conf)
			if err != nil {
				return nil, err
			}
			d.Score = &w
			c, err := abstat.Welch(abstat.Summarize(arm.costs), abstat.Summarize(ctrl.costs), o.conf)
			if err != nil {
				return nil, err
			}
			d.Cost = &c
		} else {
			rep.Notes = append(rep.Notes, fmt.Sprintf("arm %s or the control has fewer than 2 outcomes: no Welch interval", a.Arm))
		}
		switch {
		case o.reps > 0 && (len(arm.byUnit) < arm.N || len(ctrl.byUnit) < ctrl.N):
			// Units repeat: resample units, not decisions, and say how
			// much the repetition widens the interval.
			ua, uc := arm.unitClusters(), ctrl.unitClusters()
			b, err := abstat.ClusterBootstrapMeanDiff(ua, uc, o.reps, o.conf, rand.New(rand.NewPCG(o.seed, 0xab)))
			if err != nil {
				return nil, err
			}
			de, err := abstat.DesignEffect(ua, uc, o.reps, rand.New(rand.NewPCG(o.seed, 0xde)))
			if err != nil {
				return nil, err
			}
			d.ScoreBoot, d.BootByUnit, d.DesignEffect = &b, true, de
			rep.Notes = append(rep.Notes, fmt.Sprintf("arm %s vs %s: %d decisions come from %d units; the bootstrap interval resamples units, and its variance is %.2f× that of resampling decisions (design effect). The Welch, Newcombe and z figures treat decisions as independent: read them as too narrow when the design effect is well above 1",
				a.Arm, rep.Control, arm.N+ctrl.N, len(arm.byUnit)+len(ctrl.byUnit), de))
		case o.reps > 0:
			b, err := abstat.BootstrapMeanDiff(arm.scores, ctrl.scores, o.reps, o.conf, rand.New(rand.NewPCG(o.seed, 0xab)))
			if err != nil {
				return nil, err
			}
			d.ScoreBoot = &b
		}
		rep.Diffs = append(rep.Diffs, d)
	}

	if alloc != nil {
		s := &abSRM{Allocation: alloc}
		var weights []float64
		for n := range alloc {
			s.Arms = append(s.Arms, n)
		}
		slices.Sort(s.Arms)
		for n := range byArm {
			if _, ok := alloc[n]; !ok {
				return nil, fmt.Errorf("arm %q appears in the traces but not in the allocation", n)
			}
		}
		for _, n := range s.Arms {
			s.Units = append(s.Units, len(units[n]))
			weights = append(weights, alloc[n])
		}
		r, err := abstat.SRM(s.Units, weights)
		if err != nil {
			return nil, err
		}
		if math.IsInf(r.ChiSq, 1) {
			// units in an arm of weight 0: a mismatch by definition; keep
			// the JSON finite
			r.ChiSq = math.MaxFloat64
			rep.Notes = append(rep.Notes, "an arm with allocation weight 0 received units")
		}
		s.SRMResult = r
		s.Mismatch = r.P < 0.001
		rep.SRM = s
	} else {
		rep.Notes = append(rep.Notes, "no allocation given (--allocation or --config): sample-ratio check skipped")
	}

	if o.power > 0 {
		base := ctrl.Success.Est
		p2 := base + o.mde
		if p2 >= 1 {
			p2 = base - o.mde
		}
		if base <= 0 || base >= 1 || p2 <= 0 {
			return nil, fmt.Errorf("--power: the control's success rate %.4f leaves no room for a difference of %v", base, o.mde)
		}
		n, err := abstat.SampleSizeTwoProportions(base, p2, o.alpha, o.power)
		if err != nil {
			return nil, err
		}
		cur := ctrl.N
		for _, a := range rep.Arms {
			cur = min(cur, a.N)
		}
		ach, err := abstat.PowerTwoProportions(base, p2, o.alpha, cur)
		if err != nil {
			return nil, err
		}
		rep.Power = &abPower{Target: o.power, MDE: o.mde, Alpha: o.alpha, Baseline: base, NeededPer: n, CurrentMin: cur, Achieved: ach}
	}
	if jd.Ignored > 0 {
		rep.Notes = append(rep.Notes, fmt.Sprintf("%d outcome spans in the traces were ignored in favour of %s", jd.Ignored, jd.OutcomeSource))
	}
	return rep, nil
}

func fmtIv(iv abstat.Interval) string {
	return fmt.Sprintf("%+.4f [%+.4f, %+.4f]", iv.Est, iv.Lo, iv.Hi)
}

func (r *abReport) write(w io.Writer) error {
	fmt.Fprintf(w, "read %d file(s): %d decisions (%d failed), %d outcome spans; outcomes from %s\n",
		len(r.Files), r.Stats.Decisions, r.Stats.FailedDecisions, r.Stats.Outcomes, r.OutcomeSource)
	fmt.Fprintf(w, "joined %d decisions with outcomes; %d without outcome, %d without key, %d outcomes without decision\n\n",
		r.Join.Joined, r.Join.DecisionsWithoutOutcome, r.Join.DecisionsWithoutKey, r.Join.OutcomesWithoutDecision)
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
