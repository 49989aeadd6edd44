package cli

import (
	"encoding/json"
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/plotutil"
	"gonum.org/v1/plot/vg"

	"github.com/hopwise/hopwise/internal/abstat"
	"github.com/hopwise/hopwise/internal/ope"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
)

func init() { register(newTuneCmd) }

// tuneOptions are the flags of `hopwise tune`.
type tuneOptions struct {
	traces       []string
	outcomes     string
	objective    string
	costPerToken float64
	out          string
	plots        string
	base         string
	json         bool
	taus         string
	tauPoints    int
	maxHops      string
	estimator    string
	floor        float64
	minESS       float64
	folds        int
	reps         int
	seed         uint64
	conf         float64
	arm          string
}

func newTuneCmd() *cobra.Command {
	o := tuneOptions{objective: "score", tauPoints: 21, estimator: "dr", floor: ope.DefaultFloor,
		minESS: ope.DefaultMinESS, folds: ope.DefaultFolds, reps: ope.DefaultReps, seed: 1, conf: 0.95, arm: router.ArmRouted}
	cmd := &cobra.Command{
		Use:   "tune --traces PATH... [--outcomes FILE.jsonl] --out config.json [flags]",
		Short: "Choose the gain threshold τ and max bridges H by off-policy evaluation of traces",
		Long: `tune reads OTLP JSON Lines traces written through the otelx package, joins the
decisions with their outcomes by unit key (outcome spans, or --outcomes
FILE.jsonl in the format "hopwise ab --help" shows), and estimates, for each
candidate policy "chain when score ≥ τ and the chain has at most H bridges,
else direct", the value it would have had:

  IPS     inverse propensity scoring,
  SNIPS   self-normalised IPS,
  DR      doubly robust, with a binned per-mode outcome model fitted on the logs
          and cross-fitted over --folds folds,

each with a percentile (Poisson) bootstrap interval, the cost estimated the
same way, and the effective sample size. Decisions are weighted by
1/hopwise.sampling.ratio. Only decisions of the routed policy are used
(arm --arm, or no arm; reasons gain-above/below-threshold, no-chain, explore):
other arms and fallbacks are counted and left out.

The logging router must explore (router exploration ε > 0) and the spans must
carry hopwise.route.propensity: without propensities tune refuses. A policy
that would need a mode the logger took with probability below --floor, or
whose effective sample size is below --min-ess, gets no estimate and says why.

The objective is the outcome score, or with --objective score-cost the score
minus tokens × --cost-per-token. The best supported policy by --estimator is
written to --out in the router config format (the other fields from --base,
or the defaults), with --plots DIR adding value-vs-τ and calibration PNGs.
Exit status: 0 with a recommendation, 2 when no policy can be supported (no
config written), 1 on errors.`,
		Example: `  hopwise tune --traces traces.jsonl --out tuned.json
  hopwise tune --traces day1.jsonl day2.jsonl --outcomes outcomes.jsonl --objective score-cost --cost-per-token 2e-6 --out tuned.json --plots plots/`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			rep, err := runTune(o)
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
			} else if err := rep.write(out); err != nil {
				return err
			}
			if rep.Best == nil {
				return &ExitError{Code: 2, Err: errors.New("tune: no candidate policy has a supported estimate; no config written")}
			}
			return nil
		},
	}
	f := cmd.Flags()
	f.StringSliceVar(&o.traces, "traces", nil, "OTLP JSON Lines trace files (repeat or comma-separate)")
	f.StringVar(&o.outcomes, "outcomes", "", "plain outcomes JSONL file joined by key (replaces outcome spans)")
	f.StringVar(&o.objective, "objective", o.objective, "score or score-cost")
	f.Float64Var(&o.costPerToken, "cost-per-token", 0, "price of one token (needed by score-cost; 0 reports cost in tokens)")
	f.StringVar(&o.out, "out", "", "write the recommended router config JSON here")
	f.StringVar(&o.plots, "plots", "", "directory for value.png and calibration.png")
	f.StringVar(&o.base, "base", "", "router config JSON whose other fields the recommendation keeps (default: router defaults)")
	f.BoolVar(&o.json, "json", false, "print the report as JSON")
	f.StringVar(&o.taus, "taus", "", "comma-separated τ grid (default: --tau-points quantiles of the logged scores)")
	f.IntVar(&o.tauPoints, "tau-points", o.tauPoints, "size of the automatic τ grid")
	f.StringVar(&o.maxHops, "max-hops", "", "comma-separated H grid (default 1..max_bridges of --base)")
	f.StringVar(&o.estimator, "estimator", o.estimator, "estimator that picks the recommendation: dr, snips or ips")
	f.Float64Var(&o.floor, "floor", o.floor, "smallest logging probability of a target mode")
	f.Float64Var(&o.minESS, "min-ess", o.minESS, "smallest effective sample size for an estimate")
	f.IntVar(&o.folds, "folds", o.folds, "cross-fitting folds of the DR outcome model (1 fits it in-sample)")
	f.IntVar(&o.reps, "reps", o.reps, "bootstrap replicates")
	f.Uint64Var(&o.seed, "seed", o.seed, "bootstrap seed")
	f.Float64Var(&o.conf, "confidence", o.conf, "confidence level of the intervals")
	f.StringVar(&o.arm, "arm", o.arm, "A/B arm whose decisions follow the routed policy")
	return cmd
}

type tunePolicy struct {
	ope.PolicyResult
	Current bool `json:"current,omitempty"`
}

type tuneReport struct {
	*joinedData
	Objective   string         `json:"objective"`
	CostUnit    string         `json:"cost_unit"`
	Estimator   string         `json:"estimator"`
	Used        int            `json:"used"`
	Excluded    map[string]int `json:"excluded"`
	Policies    []tunePolicy   `json:"policies"`
	Best        *tunePolicy    `json:"best,omitempty"`
	Current     *tunePolicy    `json:"current,omitempty"`
	Config      string         `json:"config,omitempty"`
	Plots       []string       `json:"plots,omitempty"`
	Calibration []calibBin     `json:"calibration"`
	Notes       []string       `json:"notes,omitempty"`
}

type calibBin struct {
	N         int     `json:"n"`
	Predicted float64 `json:"predicted_err"` // mean router expected error
	Realised  float64 `json:"realised_err"`  // mean 1 − outcome score
}

var routedReasons = map[string]bool{
	router.ReasonGainAbove: true, router.ReasonGainBelow: true,
	router.ReasonNoChain: true, router.ReasonExplore: true,
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

func pick(r ope.PolicyResult, est string) ope.Estimate {
	switch est {
	case "ips":
		return r.IPS
	case "snips":
		return r.SNIPS
	}
	return r.DR
}

func runTune(o tuneOptions) (*tuneReport, error) {
	switch o.objective {
	case "score":
	case "score-cost":
		if !(o.costPerToken > 0) {
			return nil, errors.New("--objective score-cost needs --cost-per-token > 0")
		}
	default:
		return nil, fmt.Errorf("--objective %q: want score or score-cost", o.objective)
	}
	if o.estimator != "dr" && o.estimator != "snips" && o.estimator != "ips" {
		return nil, fmt.Errorf("--estimator %q: want dr, snips or ips", o.estimator)
	}
	if o.costPerToken < 0 || math.IsNaN(o.costPerToken) {
		return nil, fmt.Errorf("--cost-per-token %v: want ≥ 0", o.costPerToken)
	}
	if o.reps < 1 {
		return nil, fmt.Errorf("--reps %d: tune reports bootstrap intervals and needs at least 1 replicate (400 by default)", o.reps)
	}
	base := router.DefaultConfig()
	if o.base != "" {
		c, err := router.LoadConfig(o.base)
		if err != nil {
			return nil, err
		}
		base = c
	}
	var hops []int
	if o.maxHops != "" {
		fs, err := parseFloats(o.maxHops, "--max-hops")
		if err != nil {
			return nil, err
		}
		for _, f := range fs {
			if f != math.Trunc(f) || f < 0 || f > router.MaxBridgesLimit {
				return nil, fmt.Errorf("--max-hops: %v is not an integer in [0, %d]", f, router.MaxBridgesLimit)
			}
			hops = append(hops, int(f))
		}
	} else {
		for h := 1; h <= max(1, base.MaxBridges); h++ {
			hops = append(hops, h)
		}
	}

	jd, err := loadJoined(o.traces, o.outcomes)
	if err != nil {
		return nil, err
	}
	rep := &tuneReport{joinedData: jd, Objective: o.objective, Estimator: o.estimator, Excluded: map[string]int{}, CostUnit: "tokens"}
	if o.costPerToken > 0 {
		rep.CostUnit = "price"
	}
	var samples []ope.Sample
	var scores []float64
	for _, j := range jd.Joined {
		d, oc := j.Decision, j.Outcome
		switch {
		case d.Arm != "" && d.Arm != o.arm:
			rep.Excluded["arm "+d.Arm]++
			continue
		case !routedReasons[d.Reason]:
			rep.Excluded["reason "+d.Reason]++
			continue
		}
		mode := ope.Direct
		if d.Mode == "chain" {
			mode = ope.Chain
		}
		prop := d.Propensity
		if !d.HasPropensity() {
			prop = 0
		}
		cost := outcomeCost(oc, o.costPerToken)
		reward := oc.Score
		if o.objective == "score-cost" {
			reward -= cost
		}
		samples = append(samples, ope.Sample{
			ID: d.Source, Logged: mode, HasChain: d.HasChain, Score: d.Score, Hops: d.ChainHops,
			Propensity: prop, Weight: 1 / d.SamplingRatio, Reward: reward, Cost: cost,
		})
		if d.HasChain {
			scores = append(scores, d.Score)
		}
	}
	rep.Used = len(samples)
	if len(samples) == 0 {
		return nil, fmt.Errorf("no joined decision follows the routed policy (excluded: %v)", rep.Excluded)
	}
	var taus []float64
	if o.taus != "" {
		if taus, err = parseFloats(o.taus, "--taus"); err != nil {
			return nil, err
		}
	} else {
		if len(scores) == 0 {
			return nil, errors.New("no logged decision had a chain available: there is nothing to tune")
		}
		if o.tauPoints < 2 {
			return nil, fmt.Errorf("--tau-points %d: want ≥ 2", o.tauPoints)
		}
		slices.Sort(scores)
		for i := range o.tauPoints {
			q := 0.02 + 0.96*float64(i)/float64(o.tauPoints-1)
			taus = append(taus, abstat.Percentile(scores, q))
		}
		taus = append(taus, base.GainThreshold)
		slices.Sort(taus)
		taus = slices.Compact(taus)
	}
	if !slices.Contains(taus, base.GainThreshold) {
		taus = append(taus, base.GainThreshold)
		slices.Sort(taus)
	}
	if !slices.Contains(hops, base.MaxBridges) {
		hops = append(hops, base.MaxBridges)
		slices.Sort(hops)
	}
	res, err := ope.Sweep(samples, ope.Grid{Taus: taus, MaxHops: hops},
		ope.WithPropensityFloor(o.floor), ope.WithMinESS(o.minESS), ope.WithCrossFit(o.folds), ope.WithBootstrap(o.reps, o.seed), ope.WithConfidence(o.conf))
	if err != nil {
		return nil, err
	}
	for _, r := range res {
		p := tunePolicy{PolicyResult: r, Current: r.Tau == base.GainThreshold && r.MaxHops == base.MaxBridges}
		rep.Policies = append(rep.Policies, p)
	}
	for i := range rep.Policies {
		p := &rep.Policies[i]
		if p.Current {
			rep.Current = p
		}
		if !p.Supported {
			continue
		}
		if rep.Best == nil {
			rep.Best = p
			continue
		}
		v, bv := pick(p.PolicyResult, o.estimator), pick(rep.Best.PolicyResult, o.estimator)
		if v.Value.Est > bv.Value.Est || v.Value.Est == bv.Value.Est && v.Cost.Est < bv.Cost.Est {
			rep.Best = p
		}
	}
	rep.Calibration = calibration(jd.Joined, 10)
	if rep.Best != nil && o.out != "" {
		c := base
		c.GainThreshold = rep.Best.Tau
		c.MaxBridges = rep.Best.MaxHops
		if err := router.SaveConfig(o.out, c); err != nil {
			return nil, fmt.Errorf("--out %s: %w", o.out, err)
		}
		rep.Config = o.out
	}
	if o.plots != "" {
		if err := os.MkdirAll(o.plots, 0o755); err != nil {
			return nil, fmt.Errorf("--plots: %w", err)
		}
		vp := filepath.Join(o.plots, "value.png")
		if err := plotValue(vp, rep); err != nil {
			return nil, err
		}
		cp := filepath.Join(o.plots, "calibration.png")
		if err := plotCalibration(cp, rep.Calibration); err != nil {
			return nil, err
		}
		rep.Plots = []string{vp, cp}
	}
	return rep, nil
}

// calibration bins joined decisions by the router's expected error of the
// chosen estimate (equal-count bins) and reports the mean realised error
// 1 − score per bin.
func calibration(js []otelx.Joined, bins int) []calibBin {
	idx := make([]int, len(js))
	for i := range idx {
		idx[i] = i
	}
	slices.SortFunc(idx, func(a, b int) int { return cmpFloat(js[a].Decision.Err, js[b].Decision.Err) })
	bins = min(bins, len(idx))
	var out []calibBin
	for b := range bins {
		lo, hi := b*len(idx)/bins, (b+1)*len(idx)/bins
		if hi <= lo {
			continue
		}
		var c calibBin
		for _, i := range idx[lo:hi] {
			c.N++
			c.Predicted += js[i].Decision.Err
			c.Realised += 1 - js[i].Outcome.Score
		}
		c.Predicted /= float64(c.N)
		c.Realised /= float64(c.N)
		out = append(out, c)
	}
	return out
}

func plotValue(path string, rep *tuneReport) error {
	p := plot.New()
	p.Title.Text = fmt.Sprintf("estimated policy value (%s, %s) by threshold τ", strings.ToUpper(rep.Estimator), rep.Objective)
	p.X.Label.Text = "τ (routing score threshold; grid points evenly spaced)"
	p.Y.Label.Text = "estimated value with bootstrap interval"
	// The automatic grid follows the quantiles of the logged scores, which
	// bunch up, so points are placed by their rank in the τ grid and the
	// ticks carry the τ values.
	var taus []float64
	for _, pol := range rep.Policies {
		taus = append(taus, pol.Tau)
	}
	slices.Sort(taus)
	taus = slices.Compact(taus)
	rank := func(tau float64) float64 { i, _ := slices.BinarySearch(taus, tau); return float64(i) }
	var ticks []plot.Tick
	step := max(1, (len(taus)+7)/8)
	for i, tau := range taus {
		t := plot.Tick{Value: float64(i)}
		if i%step == 0 || i == len(taus)-1 {
			t.Label = strconv.FormatFloat(tau, 'g', 3, 64)
		}
		ticks = append(ticks, t)
	}
	p.X.Tick.Marker = plot.ConstantTicks(ticks)
	byH := map[int][]tunePolicy{}
	var hs []int
	for _, pol := range rep.Policies {
		if !pol.Supported {
			continue
		}
		if _, ok := byH[pol.MaxHops]; !ok {
			hs = append(hs, pol.MaxHops)
		}
		byH[pol.MaxHops] = append(byH[pol.MaxHops], pol)
	}
	slices.Sort(hs)
	if len(hs) == 0 {
		return errors.New("plot: no supported policy to draw")
	}
	for k, h := range hs {
		pts := byH[h]
		slices.SortFunc(pts, func(a, b tunePolicy) int { return cmpFloat(a.Tau, b.Tau) })
		xys := make(plotter.XYs, len(pts))
		errs := make(plotter.YErrors, len(pts))
		for i, pol := range pts {
			e := pick(pol.PolicyResult, rep.Estimator).Value
			// spread the H series a little so their intervals stay visible
			xys[i].X, xys[i].Y = rank(pol.Tau)+0.12*(float64(k)-float64(len(hs)-1)/2), e.Est
			errs[i].Low, errs[i].High = e.Est-e.Lo, e.Hi-e.Est
		}
		line, points, err := plotter.NewLinePoints(xys)
		if err != nil {
			return fmt.Errorf("plot: %w", err)
		}
		col := plotutil.Color(k)
		line.Color, points.Color = col, col
		points.Shape = plotutil.Shape(k)
		bars, err := plotter.NewYErrorBars(struct {
			plotter.XYs
			plotter.YErrors
		}{xys, errs})
		if err != nil {
			return fmt.Errorf("plot: %w", err)
		}
		bars.Color = col
		p.Add(line, points, bars)
		p.Legend.Add(fmt.Sprintf("H = %d", h), line, points)
	}
	if rep.Best != nil {
		e := pick(rep.Best.PolicyResult, rep.Estimator).Value
		s, err := plotter.NewScatter(plotter.XYs{{X: rank(rep.Best.Tau), Y: e.Est}})
		if err == nil {
			s.Color = color.RGBA{R: 0xd0, A: 0xff}
			s.Radius = vg.Points(6)
			p.Add(s)
			p.Legend.Add(fmt.Sprintf("recommended τ=%.4g H=%d", rep.Best.Tau, rep.Best.MaxHops), s)
		}
	}
	p.Add(plotter.NewGrid())
	p.Legend.Top = false
	return p.Save(8*vg.Inch, 5*vg.Inch, path)
}

// cmpFloat orders a before b by <; NaN compares equal to everything.
func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

func plotCalibration(path string, bins []calibBin) error {
	if len(bins) == 0 {
		return errors.New("plot: no calibration data")
	}
	p := plot.New()
	p.Title.Text = "calibration: router expected error vs realised error"
	p.X.Label.Text = "predicted: router expected error of the chosen estimate (bin mean)"
	p.Y.Label.Text = "realised: 1 − outcome score (bin mean)"
	xys := make(plotter.XYs, len(bins))
	for i, b := range bins {
		xys[i].X, xys[i].Y = b.Predicted, b.Realised
	}
	line, points, err := plotter.NewLinePoints(xys)
	if err != nil {
		return fmt.Errorf("plot: %w", err)
	}
	p.Add(line, points, plotter.NewGrid())
	return p.Save(6*vg.Inch, 4.5*vg.Inch, path)
}

func (r *tuneReport) write(w io.Writer) error {
	fmt.Fprintf(w, "read %d file(s): %d decisions, joined %d with outcomes (%s); %d follow the routed policy",
		len(r.Files), r.Stats.Decisions, r.Join.Joined, r.OutcomeSource, r.Used)
	if len(r.Excluded) > 0 {
		keys := make([]string, 0, len(r.Excluded))
		for k := range r.Excluded {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		fmt.Fprint(w, "; left out:")
		for _, k := range keys {
			fmt.Fprintf(w, " %s %d", k, r.Excluded[k])
		}
	}
	fmt.Fprintf(w, "\nobjective %s, cost in %s; intervals: percentile bootstrap\n\n", r.Objective, r.CostUnit)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "τ\tH\tchain share\tESS\tIPS value\tSNIPS value\tDR value\tDR cost")
	iv := func(i abstat.Interval) string { return fmt.Sprintf("%.4f [%.4f, %.4f]", i.Est, i.Lo, i.Hi) }
	for _, p := range r.Policies {
		mark := ""
		if p.Current {
			mark += " (current)"
		}
		if r.Best != nil && p.Tau == r.Best.Tau && p.MaxHops == r.Best.MaxHops {
			mark += " (best)"
		}
		if !p.Supported {
			fmt.Fprintf(tw, "%.4g\t%d\t%.3f\t%.1f\tno estimate: %s%s\n", p.Tau, p.MaxHops, p.ChainShare, p.ESS, p.Reason, mark)
			continue
		}
		fmt.Fprintf(tw, "%.4g\t%d\t%.3f\t%.1f\t%s\t%s\t%s\t%.4g [%.4g, %.4g]%s\n", p.Tau, p.MaxHops, p.ChainShare, p.ESS,
			iv(p.IPS.Value), iv(p.SNIPS.Value), iv(p.DR.Value), p.DR.Cost.Est, p.DR.Cost.Lo, p.DR.Cost.Hi, mark)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if r.Best != nil {
		e := pick(r.Best.PolicyResult, r.Estimator)
		fmt.Fprintf(w, "\nrecommended: gain_threshold %.6g, max_bridges %d — %s value %s, cost %.4g",
			r.Best.Tau, r.Best.MaxHops, strings.ToUpper(r.Estimator), iv(e.Value), e.Cost.Est)
		if r.Current != nil && r.Current.Supported {
			c := pick(r.Current.PolicyResult, r.Estimator)
			fmt.Fprintf(w, " (current τ %.6g, H %d: %s)", r.Current.Tau, r.Current.MaxHops, iv(c.Value))
		}
		fmt.Fprintln(w)
	}
	if r.Config != "" {
		fmt.Fprintf(w, "config: %s\n", r.Config)
	}
	for _, p := range r.Plots {
		fmt.Fprintf(w, "plot: %s\n", p)
	}
	for _, n := range r.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	return nil
}
