package abreport

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"

	"github.com/hopwise/hopwise/internal/abstat"
	"github.com/hopwise/hopwise/internal/traceset"
	"github.com/hopwise/hopwise/router"
)

// Arm is one arm's summary.
type Arm struct {
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
	units         map[string]bool      // unit keys
	chains        int                  // decisions answered through a chain
}

// unitClusters returns the arm's scores grouped by unit key, in key order.
func (a *Arm) unitClusters() [][]float64 {
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

// Diff is one arm against the control (arm − control).
type Diff struct {
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

// SRM is the sample-ratio check of units per arm against the allocation.
type SRM struct {
	Allocation map[string]float64 `json:"allocation"`
	abstat.SRMResult
	Arms     []string `json:"arms"`
	Units    []int    `json:"units"`
	Mismatch bool     `json:"mismatch"` // p < 0.001
}

// Power is the sample-size helper's answer: decisions per arm needed to
// detect a success difference MDE from the control's rate Baseline with
// power Target at level Alpha, and the power the smallest arm gives.
type Power struct {
	Target     float64 `json:"target_power"`
	MDE        float64 `json:"mde"`
	Alpha      float64 `json:"alpha"` // two-sided test level, 1 − confidence
	Baseline   float64 `json:"baseline"`
	NeededPer  int     `json:"needed_per_arm"`
	CurrentMin int     `json:"current_min_n"`
	Achieved   float64 `json:"achieved_power"`
}

// Report is the whole comparison; Arms has the control first.
type Report struct {
	*traceset.Set
	Confidence float64  `json:"confidence"`
	SuccessAt  float64  `json:"success_threshold"`
	CostUnit   string   `json:"cost_unit"`
	Control    string   `json:"control"`
	Arms       []Arm    `json:"arms"`
	Diffs      []Diff   `json:"diffs"`
	SRM        *SRM     `json:"srm,omitempty"`
	Power      *Power   `json:"power,omitempty"`
	Notes      []string `json:"notes,omitempty"`
}

// Options set the comparison; the zero value is not usable, start from
// DefaultOptions.
type Options struct {
	// Success: an outcome is a success when its score is ≥ Success.
	Success float64
	// CostPerToken prices tokens; 0 reports cost in tokens.
	CostPerToken float64
	// Confidence is the level of every interval; 1 − Confidence is the
	// two-sided test level of the verdicts and of the power helper.
	Confidence float64
	// Reps bootstrap replicates (0 disables the bootstrap interval) and
	// their Seed.
	Reps int
	Seed uint64
	// Control arm; "" picks direct-only when present, else the first arm
	// by name.
	Control string
	// Allocation, arm → weight, for the sample-ratio check; nil skips it.
	Allocation map[string]float64
	// Power and MDE turn on the sample-size helper (Power 0 = off).
	Power, MDE float64
}

// DefaultOptions: success at score 0.5, 95% intervals, 2000 bootstrap
// replicates, seed 1.
func DefaultOptions() Options {
	return Options{Success: 0.5, Confidence: 0.95, Reps: 2000, Seed: 1}
}

// ErrBadOption is wrapped by errors about an Options value out of range.
var ErrBadOption = errors.New("abreport: invalid option")

// ErrNoComparison: the joined decisions do not form two arms to compare.
var ErrNoComparison = errors.New("abreport: nothing to compare")

// Validate reports the first option out of range (wrapping ErrBadOption).
func (o Options) Validate() error {
	switch {
	case !(o.Confidence > 0 && o.Confidence < 1):
		return fmt.Errorf("%w: confidence %v: want a level in (0,1)", ErrBadOption, o.Confidence)
	case !(o.Success >= 0 && o.Success <= 1):
		return fmt.Errorf("%w: success threshold %v: want a score in [0,1]", ErrBadOption, o.Success)
	case o.CostPerToken < 0 || math.IsNaN(o.CostPerToken) || math.IsInf(o.CostPerToken, 0):
		return fmt.Errorf("%w: cost per token %v: want a finite value ≥ 0", ErrBadOption, o.CostPerToken)
	case o.Reps < 0:
		return fmt.Errorf("%w: bootstrap replicates %d: want ≥ 0", ErrBadOption, o.Reps)
	case o.Power != 0 && !(o.Power > 0 && o.Power < 1 && o.MDE > 0 && o.MDE < 1):
		return fmt.Errorf("%w: power %v with minimum detectable difference %v: want both in (0,1)", ErrBadOption, o.Power, o.MDE)
	}
	for arm, w := range o.Allocation {
		if !(w >= 0) || math.IsInf(w, 0) {
			return fmt.Errorf("%w: allocation of arm %q: weight %v is not a finite number ≥ 0", ErrBadOption, arm, w)
		}
	}
	if o.Allocation != nil && len(o.Allocation) < 2 {
		return fmt.Errorf("%w: allocation has %d arm(s); the sample-ratio check needs at least two", ErrBadOption, len(o.Allocation))
	}
	return nil
}

// Compare compares the arms of the joined decisions of s.
func Compare(s *traceset.Set, o Options) (*Report, error) {
	if err := o.Validate(); err != nil {
		return nil, err
	}
	rep := &Report{Set: s, Confidence: o.Confidence, SuccessAt: o.Success, CostUnit: traceset.CostUnit(o.CostPerToken)}
	byArm := rep.group(o)
	if _, ok := byArm[""]; ok {
		if len(byArm) == 1 {
			return nil, fmt.Errorf("%w: the decisions carry no A/B arm (hopwise.ab.arm): configure the router's arms to run an experiment", ErrNoComparison)
		}
		rep.Notes = append(rep.Notes, fmt.Sprintf("%d joined decisions without an arm are reported as arm \"\"", byArm[""].N))
	}
	names, err := rep.order(byArm, o.Control)
	if err != nil {
		return nil, err
	}
	for _, n := range names {
		a := byArm[n]
		a.Control = n == rep.Control
		a.Units = len(a.units)
		sum := abstat.Summarize(a.scores)
		a.MeanScore, a.ScoreSD = sum.Mean, math.Sqrt(sum.Var)
		a.MeanCost = abstat.Summarize(a.costs).Mean
		a.ChainShare = float64(a.chains) / float64(a.N)
		if a.Success, err = abstat.Wilson(a.Successes, a.N, o.Confidence); err != nil {
			return nil, err
		}
		rep.Arms = append(rep.Arms, *a)
	}
	ctrl := byArm[rep.Control]
	for _, a := range rep.Arms[1:] {
		d, err := rep.diff(byArm[a.Arm], ctrl, o)
		if err != nil {
			return nil, err
		}
		rep.Diffs = append(rep.Diffs, d)
	}
	if o.Allocation != nil {
		if rep.SRM, err = rep.srm(byArm, o.Allocation); err != nil {
			return nil, err
		}
	} else {
		rep.Notes = append(rep.Notes, "no allocation given (--allocation or --config): sample-ratio check skipped")
	}
	if o.Power > 0 {
		if rep.Power, err = rep.power(ctrl, o); err != nil {
			return nil, err
		}
	}
	return rep, nil
}

// group collects the joined decisions by arm. O(n).
func (rep *Report) group(o Options) map[string]*Arm {
	byArm := map[string]*Arm{}
	ratios := map[float64]bool{}
	for _, j := range rep.Joined {
		d, oc := j.Decision, j.Outcome
		a := byArm[d.Arm]
		if a == nil {
			a = &Arm{Arm: d.Arm, byUnit: map[string][]float64{}, units: map[string]bool{}}
			byArm[d.Arm] = a
		}
		a.N++
		a.units[d.Key] = true
		a.scores = append(a.scores, oc.Score)
		a.byUnit[d.Key] = append(a.byUnit[d.Key], oc.Score)
		a.costs = append(a.costs, traceset.Cost(oc, o.CostPerToken))
		if oc.Score >= o.Success {
			a.Successes++
		}
		if d.Mode == "chain" {
			a.chains++
		}
		ratios[d.SamplingRatio] = true
	}
	if len(ratios) > 1 {
		rep.Notes = append(rep.Notes, "the traces mix several sampling ratios; arm comparisons are unweighted, which is exact only when every arm was sampled alike")
	}
	return byArm
}

// order picks the control (direct-only when present, else the first arm by
// name, unless given) and returns the arm names, control first, then by
// name.
func (rep *Report) order(byArm map[string]*Arm, control string) ([]string, error) {
	names := make([]string, 0, len(byArm))
	for k := range byArm {
		names = append(names, k)
	}
	slices.Sort(names)
	if len(names) < 2 {
		return nil, fmt.Errorf("%w: only one arm (%q) has joined outcomes; an A/B comparison needs two", ErrNoComparison, names[0])
	}
	rep.Control = control
	if rep.Control == "" {
		rep.Control = names[0]
		if _, ok := byArm[router.ArmDirectOnly]; ok {
			rep.Control = router.ArmDirectOnly
		}
	}
	if _, ok := byArm[rep.Control]; !ok {
		return nil, fmt.Errorf("%w: control arm %q: no joined decisions in that arm (arms: %s)", ErrBadOption, rep.Control, strings.Join(names, ", "))
	}
	slices.SortStableFunc(names, func(a, b string) int {
		switch {
		case a == rep.Control:
			return -1
		case b == rep.Control:
			return 1
		}
		return strings.Compare(a, b)
	})
	return names, nil
}

// diff compares one arm with the control. O(reps·n) with the bootstrap.
func (rep *Report) diff(arm, ctrl *Arm, o Options) (Diff, error) {
	d := Diff{Arm: arm.Arm, Control: ctrl.Arm}
	var err error
	if d.Success, err = abstat.NewcombeDiff(arm.Successes, arm.N, ctrl.Successes, ctrl.N, o.Confidence); err != nil {
		return d, err
	}
	if d.Z, err = abstat.TwoProportionZ(arm.Successes, arm.N, ctrl.Successes, ctrl.N); err != nil {
		return d, err
	}
	d.Significant = d.Success.Lo > 0 || d.Success.Hi < 0
	if arm.N >= 2 && ctrl.N >= 2 {
		w, err := abstat.Welch(abstat.Summarize(arm.scores), abstat.Summarize(ctrl.scores), o.Confidence)
		if err != nil {
			return d, err
		}
		d.Score = &w
		c, err := abstat.Welch(abstat.Summarize(arm.costs), abstat.Summarize(ctrl.costs), o.Confidence)
		if err != nil {
			return d, err
		}
		d.Cost = &c
	} else {
		rep.Notes = append(rep.Notes, fmt.Sprintf("arm %s or the control has fewer than 2 outcomes: no Welch interval", arm.Arm))
	}
	switch {
	case o.Reps > 0 && (len(arm.byUnit) < arm.N || len(ctrl.byUnit) < ctrl.N):
		// Units repeat: resample units, not decisions, and say how much
		// the repetition widens the interval.
		ua, uc := arm.unitClusters(), ctrl.unitClusters()
		b, err := abstat.ClusterBootstrapMeanDiff(ua, uc, o.Reps, o.Confidence, rand.New(rand.NewPCG(o.Seed, 0xab)))
		if err != nil {
			return d, err
		}
		de, err := abstat.DesignEffect(ua, uc, o.Reps, rand.New(rand.NewPCG(o.Seed, 0xde)))
		if err != nil {
			return d, err
		}
		d.ScoreBoot, d.BootByUnit, d.DesignEffect = &b, true, de
		rep.Notes = append(rep.Notes, fmt.Sprintf("arm %s vs %s: %d decisions come from %d units; the bootstrap interval resamples units, and its variance is %.2f× that of resampling decisions (design effect). The Welch, Newcombe and z figures treat decisions as independent: read them as too narrow when the design effect is well above 1",
			arm.Arm, ctrl.Arm, arm.N+ctrl.N, len(arm.byUnit)+len(ctrl.byUnit), de))
	case o.Reps > 0:
		b, err := abstat.BootstrapMeanDiff(arm.scores, ctrl.scores, o.Reps, o.Confidence, rand.New(rand.NewPCG(o.Seed, 0xab)))
		if err != nil {
			return d, err
		}
		d.ScoreBoot = &b
	}
	return d, nil
}

// srm tests the units per arm against the allocation.
func (rep *Report) srm(byArm map[string]*Arm, alloc map[string]float64) (*SRM, error) {
	s := &SRM{Allocation: alloc}
	for n := range alloc {
		s.Arms = append(s.Arms, n)
	}
	slices.Sort(s.Arms)
	for n := range byArm {
		if _, ok := alloc[n]; !ok {
			return nil, fmt.Errorf("%w: arm %q appears in the traces but not in the allocation", ErrBadOption, n)
		}
	}
	var weights []float64
	for _, n := range s.Arms {
		u := 0
		if a := byArm[n]; a != nil {
			u = len(a.units)
		}
		s.Units = append(s.Units, u)
		weights = append(weights, alloc[n])
	}
	r, err := abstat.SRM(s.Units, weights)
	if err != nil {
		return nil, err
	}
	if math.IsInf(r.ChiSq, 1) {
		// units in an arm of weight 0: a mismatch by definition; keep the
		// JSON finite
		r.ChiSq = math.MaxFloat64
		rep.Notes = append(rep.Notes, "an arm with allocation weight 0 received units")
	}
	s.SRMResult = r
	s.Mismatch = r.P < 0.001
	return s, nil
}

// power runs the sample-size helper at the control's success rate.
func (rep *Report) power(ctrl *Arm, o Options) (*Power, error) {
	base := ctrl.Success.Est
	p2 := base + o.MDE
	if p2 >= 1 {
		p2 = base - o.MDE
	}
	if base <= 0 || base >= 1 || p2 <= 0 {
		return nil, fmt.Errorf("%w: power: the control's success rate %.4f leaves no room for a difference of %v", ErrBadOption, base, o.MDE)
	}
	alpha := 1 - o.Confidence
	n, err := abstat.SampleSizeTwoProportions(base, p2, alpha, o.Power)
	if err != nil {
		return nil, err
	}
	cur := ctrl.N
	for _, a := range rep.Arms {
		cur = min(cur, a.N)
	}
	ach, err := abstat.PowerTwoProportions(base, p2, alpha, cur)
	if err != nil {
		return nil, err
	}
	return &Power{Target: o.Power, MDE: o.MDE, Alpha: alpha, Baseline: base, NeededPer: n, CurrentMin: cur, Achieved: ach}, nil
}
