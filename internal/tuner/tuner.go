package tuner

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/hopwise/hopwise/internal/abstat"
	"github.com/hopwise/hopwise/internal/ope"
	"github.com/hopwise/hopwise/internal/traceset"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
)

// Objectives.
const (
	// ObjectiveScore maximises the outcome score.
	ObjectiveScore = "score"
	// ObjectiveScoreCost maximises score − tokens × cost per token.
	ObjectiveScoreCost = "score-cost"
)

// Decision is what a Report recommends.
type Decision string

// Decisions.
const (
	// Change: a policy other than the current one is better, with an
	// improvement interval that excludes zero.
	Change Decision = "change"
	// Keep: no policy is shown better than the current one.
	Keep Decision = "keep"
	// None: no policy has a supported estimate.
	None Decision = "none"
)

// Sentinel errors.
var (
	// ErrBadOption is wrapped by errors about an Options value.
	ErrBadOption = errors.New("tuner: invalid option")
	// ErrNoData: no joined decision follows the routed policy, or none
	// had a chain to tune over.
	ErrNoData = errors.New("tuner: nothing to tune")
)

// Options set a tuning run; start from DefaultOptions.
type Options struct {
	Objective    string  // ObjectiveScore or ObjectiveScoreCost
	CostPerToken float64 // price of a token; 0 reports cost in tokens
	Estimator    string  // "dr", "snips" or "ips": picks the recommendation
	// Taus is the τ grid; nil takes TauPoints quantiles (2%..98%) of the
	// logged scores. The current τ is always added.
	Taus      []float64
	TauPoints int
	// MaxBridges is the H grid; nil takes 1..the current max_bridges.
	// The current H is always added.
	MaxBridges []int
	Floor      float64 // smallest logging probability of a target mode
	MinESS     float64 // smallest effective sample size of an estimate
	Folds      int     // cross-fitting folds of the DR outcome model
	Reps       int     // bootstrap replicates, ≥ 1
	Seed       uint64
	Confidence float64
	// Arm is the A/B arm whose decisions follow the routed policy.
	Arm string
	// Base is the configuration in production; nil means the router
	// defaults with the exploration rate and arms read off the logs.
	Base *router.Config
}

// DefaultOptions: score objective, DR, a 21-point τ grid, the ope
// defaults, 95% intervals, the routed arm.
func DefaultOptions() Options {
	return Options{Objective: ObjectiveScore, Estimator: "dr", TauPoints: 21, Floor: ope.DefaultFloor, MinESS: ope.DefaultMinESS,
		Folds: ope.DefaultFolds, Reps: ope.DefaultReps, Seed: 1, Confidence: ope.DefaultConfidence, Arm: router.ArmRouted}
}

// Validate reports the first option out of range (wrapping ErrBadOption).
func (o Options) Validate() error {
	switch {
	case o.Objective != ObjectiveScore && o.Objective != ObjectiveScoreCost:
		return fmt.Errorf("%w: objective %q: want score or score-cost", ErrBadOption, o.Objective)
	case o.CostPerToken < 0 || math.IsNaN(o.CostPerToken) || math.IsInf(o.CostPerToken, 0):
		return fmt.Errorf("%w: cost per token %v: want a finite value ≥ 0", ErrBadOption, o.CostPerToken)
	case o.Objective == ObjectiveScoreCost && !(o.CostPerToken > 0):
		return fmt.Errorf("%w: objective score-cost needs a cost per token > 0", ErrBadOption)
	case o.Estimator != "dr" && o.Estimator != "snips" && o.Estimator != "ips":
		return fmt.Errorf("%w: estimator %q: want dr, snips or ips", ErrBadOption, o.Estimator)
	case o.Reps < 1:
		return fmt.Errorf("%w: bootstrap replicates %d: tune reports intervals and needs at least 1 (%d by default)", ErrBadOption, o.Reps, ope.DefaultReps)
	case !(o.Confidence > 0 && o.Confidence < 1):
		return fmt.Errorf("%w: confidence %v: want a level in (0,1)", ErrBadOption, o.Confidence)
	case !(o.Floor > 0 && o.Floor < 1):
		return fmt.Errorf("%w: propensity floor %v: want a probability in (0,1)", ErrBadOption, o.Floor)
	case !(o.MinESS >= 1):
		return fmt.Errorf("%w: minimum effective sample size %v: want ≥ 1", ErrBadOption, o.MinESS)
	case o.Folds < 1:
		return fmt.Errorf("%w: cross-fitting folds %d: want ≥ 1", ErrBadOption, o.Folds)
	case o.Taus == nil && o.TauPoints < 2:
		return fmt.Errorf("%w: τ grid points %d: want ≥ 2", ErrBadOption, o.TauPoints)
	}
	for _, tau := range o.Taus {
		if math.IsNaN(tau) || math.IsInf(tau, 0) {
			return fmt.Errorf("%w: τ %v is not finite", ErrBadOption, tau)
		}
	}
	for _, h := range o.MaxBridges {
		if h < 0 || h > router.MaxBridgesLimit {
			return fmt.Errorf("%w: max bridges %d not in [0, %d]", ErrBadOption, h, router.MaxBridgesLimit)
		}
	}
	return nil
}

// Policy is one evaluated (τ, H).
type Policy struct {
	ope.PolicyResult
	Current bool `json:"current,omitempty"`
}

// Pick returns the estimate of the named estimator ("dr", "snips", "ips").
func (p *Policy) Pick(estimator string) ope.Estimate {
	switch estimator {
	case "ips":
		return p.IPS
	case "snips":
		return p.SNIPS
	}
	return p.DR
}

// Improvement returns the named estimator's difference to the current
// setting, and false when there is none.
func (p *Policy) Improvement(estimator string) (abstat.Interval, bool) {
	if p.Versus == nil {
		return abstat.Interval{}, false
	}
	switch estimator {
	case "ips":
		return p.Versus.IPS, true
	case "snips":
		return p.Versus.SNIPS, true
	}
	return p.Versus.DR, true
}

// CalibBin is one bin of the calibration check.
type CalibBin struct {
	N         int     `json:"n"`
	Predicted float64 `json:"predicted_err"` // mean router expected error
	Realised  float64 `json:"realised_err"`  // mean 1 − outcome score
}

// Report is a tuning run's result.
type Report struct {
	*traceset.Set
	Objective  string         `json:"objective"`
	CostUnit   string         `json:"cost_unit"`
	Estimator  string         `json:"estimator"`
	Confidence float64        `json:"confidence"`
	Used       int            `json:"used"`
	Excluded   map[string]int `json:"excluded"`
	Policies   []Policy       `json:"policies"`
	// Best is the supported policy with the highest estimated value (ties:
	// lower cost); Current the current setting's row.
	Best    *Policy `json:"best,omitempty"`
	Current *Policy `json:"current,omitempty"`
	// Decision and Why: change to Best, keep Current, or none.
	Decision Decision `json:"decision"`
	Why      string   `json:"why"`
	// Config is the router configuration to run: the current one with
	// Best's τ and H on Change, unchanged on Keep, nil on None.
	Config      *router.Config `json:"-"`
	Calibration []CalibBin     `json:"calibration"`
	Notes       []string       `json:"notes,omitempty"`
	// ConfigFile and Plots are set by the caller that writes them.
	ConfigFile string   `json:"config,omitempty"`
	Plots      []string `json:"plots,omitempty"`
}

// routedReasons are the reasons of decisions taken by the routed policy.
var routedReasons = map[string]bool{
	router.ReasonGainAbove: true, router.ReasonGainBelow: true,
	router.ReasonNoChain: true, router.ReasonExplore: true,
}

// Run tunes τ and H on the joined decisions of s.
func Run(s *traceset.Set, o Options) (*Report, error) {
	if err := o.Validate(); err != nil {
		return nil, err
	}
	rep := &Report{Set: s, Objective: o.Objective, Estimator: o.Estimator, Confidence: o.Confidence,
		Excluded: map[string]int{}, CostUnit: traceset.CostUnit(o.CostPerToken)}
	base, notes := current(s.Log.Decisions, o)
	rep.Notes = append(rep.Notes, notes...)
	samples, scores := rep.samples(o)
	if len(samples) == 0 {
		return nil, fmt.Errorf("%w: no joined decision follows the routed policy (left out: %v)", ErrNoData, rep.Excluded)
	}
	grid, err := makeGrid(o, base, scores)
	if err != nil {
		return nil, err
	}
	res, err := ope.Sweep(samples, grid,
		ope.WithPropensityFloor(o.Floor), ope.WithMinESS(o.MinESS), ope.WithCrossFit(o.Folds),
		ope.WithBootstrap(o.Reps, o.Seed), ope.WithConfidence(o.Confidence), ope.WithReference(base.GainThreshold, base.MaxBridges))
	if err != nil {
		return nil, err
	}
	for _, r := range res {
		rep.Policies = append(rep.Policies, Policy{PolicyResult: r, Current: r.Tau == base.GainThreshold && r.MaxHops == base.MaxBridges})
	}
	rep.decide(base)
	rep.Calibration = calibration(s.Joined, 10)
	return rep, nil
}

// samples turns the joined decisions of the routed policy into ope
// samples, counting the others in Excluded; scores are the routing scores
// of decisions with a chain.
func (rep *Report) samples(o Options) (samples []ope.Sample, scores []float64) {
	for _, j := range rep.Joined {
		d, oc := j.Decision, j.Outcome
		switch {
		case d.Arm != "" && d.Arm != o.Arm:
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
		cost := traceset.Cost(oc, o.CostPerToken)
		reward := oc.Score
		if o.Objective == ObjectiveScoreCost {
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
	return samples, scores
}

// makeGrid builds the (τ, H) grid, the current setting included.
func makeGrid(o Options, base router.Config, scores []float64) (ope.Grid, error) {
	taus := slices.Clone(o.Taus)
	if taus == nil {
		if len(scores) == 0 {
			return ope.Grid{}, fmt.Errorf("%w: no logged decision had a chain available", ErrNoData)
		}
		sorted := slices.Sorted(slices.Values(scores))
		for i := range o.TauPoints {
			q := 0.02 + 0.96*float64(i)/float64(o.TauPoints-1)
			taus = append(taus, abstat.Percentile(sorted, q))
		}
	}
	taus = append(taus, base.GainThreshold)
	slices.Sort(taus)
	taus = slices.Compact(taus)
	hops := slices.Clone(o.MaxBridges)
	if hops == nil {
		for h := 1; h <= max(1, base.MaxBridges); h++ {
			hops = append(hops, h)
		}
	}
	hops = append(hops, base.MaxBridges)
	slices.Sort(hops)
	return ope.Grid{Taus: taus, MaxHops: slices.Compact(hops)}, nil
}

// decide picks Best and sets Decision, Why and Config.
func (rep *Report) decide(base router.Config) {
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
		v, bv := p.Pick(rep.Estimator), rep.Best.Pick(rep.Estimator)
		if v.Value.Est > bv.Value.Est || v.Value.Est == bv.Value.Est && v.Cost.Est < bv.Cost.Est {
			rep.Best = p
		}
	}
	// A tie with the current setting goes to the current setting.
	if c := rep.Current; rep.Best != nil && c != nil && c.Supported && c.Pick(rep.Estimator).Value.Est >= rep.Best.Pick(rep.Estimator).Value.Est {
		rep.Best = c
	}
	est := strings.ToUpper(rep.Estimator)
	cur := fmt.Sprintf("τ %s, H %d", FormatTaus([]float64{base.GainThreshold})[0], base.MaxBridges)
	keep := func(why string) {
		rep.Decision, rep.Why = Keep, why
		c := base
		rep.Config = &c
	}
	switch {
	case rep.Best == nil:
		rep.Decision, rep.Why = None, "no candidate policy has a supported estimate"
	case !rep.Current.Supported:
		keep(fmt.Sprintf("the current setting (%s) has no estimate (%s), so no other policy can be shown better", cur, rep.Current.Reason))
	case rep.Best.Current:
		keep(fmt.Sprintf("the current setting (%s) has the highest %s value", cur, est))
	default:
		imp, _ := rep.Best.Improvement(rep.Estimator)
		iv := fmt.Sprintf("%+.4g [%+.4g, %+.4g]", imp.Est, imp.Lo, imp.Hi)
		lvl := fmt.Sprintf("%g%%", 100*rep.Confidence)
		if imp.Lo > 0 {
			rep.Decision = Change
			rep.Why = fmt.Sprintf("its %s value exceeds the current setting's (%s) by %s, a %s paired bootstrap interval that excludes zero", est, cur, iv, lvl)
			c := base
			c.GainThreshold, c.MaxBridges = rep.Best.Tau, rep.Best.MaxHops
			rep.Config = &c
			return
		}
		keep(fmt.Sprintf("the best estimated policy (τ %s, H %d) beats the current setting (%s) by %s %s, a %s paired bootstrap interval that includes zero",
			FormatTaus([]float64{rep.Best.Tau})[0], rep.Best.MaxHops, cur, iv, est, lvl))
	}
}

// calibration bins joined decisions by the router's expected error of the
// chosen estimate (equal-count bins) and reports the mean realised error
// 1 − score per bin. O(n log n).
func calibration(js []otelx.Joined, bins int) []CalibBin {
	idx := make([]int, len(js))
	for i := range idx {
		idx[i] = i
	}
	slices.SortFunc(idx, func(a, b int) int { return cmpFloat(js[a].Decision.Err, js[b].Decision.Err) })
	bins = min(bins, len(idx))
	var out []CalibBin
	for b := range bins {
		lo, hi := b*len(idx)/bins, (b+1)*len(idx)/bins
		if hi <= lo {
			continue
		}
		var c CalibBin
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
