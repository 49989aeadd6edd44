package ope

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"github.com/hopwise/hopwise/internal/abstat"
)

// Sentinel errors.
var (
	// ErrMissingPropensity: a sample has no logged propensity (0, NaN),
	// so no off-policy estimate can be formed. Log decisions with the
	// router's exploration on and the propensity attribute recorded.
	ErrMissingPropensity = errors.New("ope: logged propensity missing")
	// ErrBadSample: a sample's fields are out of range.
	ErrBadSample = errors.New("ope: bad sample")
	// ErrNoData: no samples.
	ErrNoData = errors.New("ope: no samples")
	// ErrBadOption: an option value is out of range.
	ErrBadOption = errors.New("ope: invalid option")
)

// Action is a routing mode.
type Action uint8

const (
	// Direct answers from the pair's own statistics.
	Direct Action = 0
	// Chain answers through bridges.
	Chain Action = 1
)

func (a Action) String() string {
	if a == Chain {
		return "chain"
	}
	return "direct"
}

// Sample is one logged decision joined with its outcome.
type Sample struct {
	ID         string  // where it came from (file:line, span id), for messages
	Logged     Action  // mode the logging policy took
	HasChain   bool    // a chain was available, so a policy could chain
	Score      float64 // the routing score compared with τ (gain, or utility)
	Hops       int     // bridges in the available chain
	Propensity float64 // π0(Logged | x) in (0, 1]; 0 or NaN = missing
	Weight     float64 // 1/sampling ratio, > 0
	Reward     float64 // outcome to maximise
	Cost       float64 // secondary quantity estimated alongside (e.g. token cost)
}

// Defaults.
const (
	DefaultFloor      = 0.01
	DefaultMinESS     = 30
	DefaultReps       = 400
	DefaultConfidence = 0.95
	// DefaultFolds is the number of cross-fitting folds of the DR outcome
	// model (5 is the usual choice; Chernozhukov et al. 2018 §3).
	DefaultFolds = 5
)

// Option configures an evaluation.
type Option func(*config)

type config struct {
	ref    *reference
	floor  float64
	minESS float64
	reps   int
	seed   uint64
	conf   float64
	bins   int
	folds  int
}

// WithPropensityFloor sets the smallest logging probability of the target
// mode that a sample may have (default 0.01). Must be in (0, 1).
func WithPropensityFloor(f float64) Option { return func(c *config) { c.floor = f } }

// WithMinESS sets the smallest effective sample size for which a policy is
// estimated (default 30). Must be ≥ 1.
func WithMinESS(x float64) Option { return func(c *config) { c.minESS = x } }

// WithBootstrap sets the number of bootstrap replicates (default 400, 0
// disables intervals) and the seed.
func WithBootstrap(reps int, seed uint64) Option {
	return func(c *config) { c.reps, c.seed = reps, seed }
}

// WithConfidence sets the interval level (default 0.95).
func WithConfidence(level float64) Option { return func(c *config) { c.conf = level } }

// WithBins sets the maximum number of score bins of the outcome model
// (default 10).
func WithBins(n int) Option { return func(c *config) { c.bins = n } }

// WithCrossFit sets the number of cross-fitting folds of the doubly robust
// estimator's outcome model (default DefaultFolds). With k ≥ 2, sample i
// falls in fold i mod k (interleaved, so a drift over the log spreads over
// every fold) and its q̂ is fitted on the other folds only, so a sample's
// own outcome never enters the model that corrects it (cross-fitting:
// Chernozhukov et al. 2018, "Double/debiased machine learning", §3).
// k = 1 fits one model on every sample (in-sample). Must be ≥ 1.
func WithCrossFit(k int) Option { return func(c *config) { c.folds = k } }

// reference is the policy of WithReference.
type reference struct {
	tau     float64
	maxHops int
}

// WithReference names the policy (τ, H) every other policy is compared
// with, usually the one in production: each PolicyResult then carries
// Versus, its value minus the reference's, with a paired bootstrap
// interval. The reference must be in the grid.
func WithReference(tau float64, maxHops int) Option {
	return func(c *config) { c.ref = &reference{tau, maxHops} }
}

func buildConfig(opts []Option) (config, error) {
	c := config{floor: DefaultFloor, minESS: DefaultMinESS, reps: DefaultReps, seed: 1, conf: DefaultConfidence, bins: 10, folds: DefaultFolds}
	for _, o := range opts {
		if o != nil {
			o(&c)
		}
	}
	switch {
	case !(c.floor > 0 && c.floor < 1):
		return c, fmt.Errorf("%w: propensity floor %v not in (0,1)", ErrBadOption, c.floor)
	case !(c.minESS >= 1):
		return c, fmt.Errorf("%w: minimum ESS %v < 1", ErrBadOption, c.minESS)
	case c.reps < 0:
		return c, fmt.Errorf("%w: bootstrap replicates %d < 0", ErrBadOption, c.reps)
	case !(c.conf > 0 && c.conf < 1):
		return c, fmt.Errorf("%w: confidence %v not in (0,1)", ErrBadOption, c.conf)
	case c.bins < 1:
		return c, fmt.Errorf("%w: bins %d < 1", ErrBadOption, c.bins)
	case c.folds < 1:
		return c, fmt.Errorf("%w: cross-fitting folds %d < 1", ErrBadOption, c.folds)
	}
	return c, nil
}

// Estimate is one estimator's value and cost with intervals.
type Estimate struct {
	Value abstat.Interval `json:"value"`
	Cost  abstat.Interval `json:"cost"`
}

// PolicyResult is the evaluation of one threshold policy.
type PolicyResult struct {
	Tau     float64 `json:"tau"`
	MaxHops int     `json:"max_hops"`
	// Supported is false when no estimate can be given; Reason says why
	// and the estimates are zero.
	Supported bool   `json:"supported"`
	Reason    string `json:"reason,omitempty"`
	// Unsupported counts samples whose target mode had logging
	// probability below the floor.
	Unsupported int     `json:"unsupported"`
	ESS         float64 `json:"ess"`
	// ChainShare is the weighted share of samples the policy would chain.
	ChainShare float64  `json:"chain_share"`
	IPS        Estimate `json:"ips"`
	SNIPS      Estimate `json:"snips"`
	DR         Estimate `json:"dr"`
	// Versus compares the policy with the reference of WithReference;
	// nil without a reference or when either policy has no estimate.
	Versus *Versus `json:"versus_reference,omitempty"`
}

// Versus is a policy's value minus the reference policy's, per
// estimator. The intervals are percentile intervals of the paired
// differences: both policies are evaluated on the same bootstrap
// replicates, so their common noise cancels. An interval that excludes 0
// says the policies differ at the interval's level (for one comparison
// chosen in advance; the best of a grid picked after looking is favoured
// by chance, so treat a narrow exclusion with care).
type Versus struct {
	Tau     float64         `json:"tau"`
	MaxHops int             `json:"max_hops"`
	IPS     abstat.Interval `json:"ips"`
	SNIPS   abstat.Interval `json:"snips"`
	DR      abstat.Interval `json:"dr"`
}

// term indexes the per-sample sums.
const (
	tIPSR = iota
	tIPSC
	tDen
	tDRR
	tDRC
	tV
	tV2
	tUnsup
	tChain
	nTerms
)

// Grid is the set of (τ, H) policies to evaluate.
type Grid struct {
	Taus    []float64
	MaxHops []int
}

// Evaluate estimates the single policy (tau, maxHops). See Sweep.
func Evaluate(samples []Sample, tau float64, maxHops int, opts ...Option) (PolicyResult, error) {
	rs, err := Sweep(samples, Grid{Taus: []float64{tau}, MaxHops: []int{maxHops}}, opts...)
	if err != nil {
		return PolicyResult{}, err
	}
	return rs[0], nil
}

// Validate checks every sample and returns the first problem, wrapped in
// ErrMissingPropensity or ErrBadSample, with the count of affected samples.
func Validate(samples []Sample) error {
	if len(samples) == 0 {
		return ErrNoData
	}
	missing, firstMissing := 0, -1
	for i := range samples {
		s := &samples[i]
		p := s.Propensity
		if p == 0 || math.IsNaN(p) {
			missing++
			if firstMissing < 0 {
				firstMissing = i
			}
			continue
		}
		switch {
		case p < 0 || p > 1:
			return fmt.Errorf("%w: %s: propensity %v outside (0,1]", ErrBadSample, s.ID, p)
		case !(s.Weight > 0) || math.IsInf(s.Weight, 0):
			return fmt.Errorf("%w: %s: weight %v (want 1/sampling ratio > 0)", ErrBadSample, s.ID, s.Weight)
		case math.IsNaN(s.Reward) || math.IsInf(s.Reward, 0) || math.IsNaN(s.Cost) || math.IsInf(s.Cost, 0):
			return fmt.Errorf("%w: %s: reward %v, cost %v", ErrBadSample, s.ID, s.Reward, s.Cost)
		case s.Logged == Chain && !s.HasChain:
			return fmt.Errorf("%w: %s: logged mode chain without an available chain", ErrBadSample, s.ID)
		case s.Logged > Chain:
			return fmt.Errorf("%w: %s: unknown mode %d", ErrBadSample, s.ID, s.Logged)
		case s.Hops < 0:
			return fmt.Errorf("%w: %s: hops %d", ErrBadSample, s.ID, s.Hops)
		case s.HasChain && math.IsNaN(s.Score):
			return fmt.Errorf("%w: %s: routing score is NaN", ErrBadSample, s.ID)
		}
	}
	if missing > 0 {
		return fmt.Errorf("%w: %d of %d decisions have no propensity (first: %s); "+
			"turn on the router's exploration and record hopwise.route.propensity", ErrMissingPropensity, missing, len(samples), samples[firstMissing].ID)
	}
	return nil
}

// Sweep evaluates every policy (τ, H) of the grid: chain when a chain
// exists, its score ≥ τ and its hops ≤ H, else direct. Results come in
// grid order, τ outer, H inner. Cost O(n log n + reps·(n + |τ|·|H|)).
func Sweep(samples []Sample, grid Grid, opts ...Option) ([]PolicyResult, error) {
	cfg, err := buildConfig(opts)
	if err != nil {
		return nil, err
	}
	if len(grid.Taus) == 0 || len(grid.MaxHops) == 0 {
		return nil, fmt.Errorf("%w: empty grid", ErrBadOption)
	}
	for _, tau := range grid.Taus {
		if math.IsNaN(tau) {
			return nil, fmt.Errorf("%w: NaN threshold in grid", ErrBadOption)
		}
	}
	for _, h := range grid.MaxHops {
		if h < 0 {
			return nil, fmt.Errorf("%w: negative max hops %d in grid", ErrBadOption, h)
		}
	}
	if err := Validate(samples); err != nil {
		return nil, err
	}
	models := fitFolds(samples, cfg.bins, cfg.folds)

	// Sorted copies of the grid; results are mapped back to grid order.
	taus := slices.Clone(grid.Taus)
	slices.Sort(taus)
	taus = slices.Compact(taus)
	hops := slices.Clone(grid.MaxHops)
	slices.Sort(hops)
	hops = slices.Compact(hops)
	G, H := len(taus), len(hops)
	ref := -1
	if cfg.ref != nil {
		j, okT := slices.BinarySearch(taus, cfg.ref.tau)
		h, okH := slices.BinarySearch(hops, cfg.ref.maxHops)
		if !okT || !okH {
			return nil, fmt.Errorf("%w: reference policy τ=%v H=%d is not in the grid", ErrBadOption, cfg.ref.tau, cfg.ref.maxHops)
		}
		ref = j*H + h
	}

	n := len(samples)
	base := make([]float64, nTerms)      // Σ of direct-target terms
	direct := make([][nTerms]float64, n) // direct-target terms
	diffs := make([][nTerms]float64, n)  // chain-target minus direct-target terms
	cell := make([]int, n)               // bucket index or −1
	var sumW float64
	for i := range samples {
		s := &samples[i]
		model := models[i%len(models)]
		var d, a [nTerms]float64
		terms(s, Direct, model, cfg.floor, &d)
		if s.HasChain {
			terms(s, Chain, model, cfg.floor, &a)
		} else {
			a = d
		}
		direct[i] = d
		for k := range nTerms {
			base[k] += d[k]
			diffs[i][k] = a[k] - d[k]
		}
		sumW += s.Weight
		cell[i] = -1
		if !s.HasChain {
			continue
		}
		// largest τ index with τ ≤ score; smallest H index with H ≥ hops
		j := sortSearchFloat(taus, s.Score) - 1
		h, _ := slices.BinarySearch(hops, s.Hops)
		if j >= 0 && h < H {
			cell[i] = j*H + h
		}
	}

	point := aggregate(base, diffs, cell, nil, G, H)
	results := make([]PolicyResult, G*H)
	for j := range G {
		for h := range H {
			t := point[j*H+h]
			r := &results[j*H+h]
			r.Tau, r.MaxHops = taus[j], hops[h]
			r.Unsupported = int(math.Round(t[tUnsup]))
			r.ChainShare = t[tChain] / sumW
			if t[tV2] > 0 {
				r.ESS = t[tV] * t[tV] / t[tV2]
			}
			r.Supported = true
			switch {
			case r.Unsupported > 0:
				r.Supported = false
				r.Reason = fmt.Sprintf("%d decisions would need a mode the logging policy took with probability < %g", r.Unsupported, cfg.floor)
			case r.ESS < cfg.minESS:
				r.Supported = false
				r.Reason = fmt.Sprintf("effective sample size %.1f below the minimum %g", r.ESS, cfg.minESS)
			}
			if !r.Supported {
				continue
			}
			r.IPS.Value.Est = t[tIPSR] / sumW
			r.IPS.Cost.Est = t[tIPSC] / sumW
			r.SNIPS.Value.Est = t[tIPSR] / t[tDen]
			r.SNIPS.Cost.Est = t[tIPSC] / t[tDen]
			r.DR.Value.Est = t[tDRR] / sumW
			r.DR.Cost.Est = t[tDRC] / sumW
		}
	}
	setVersus(results, ref)
	if cfg.reps > 0 {
		if err := bootstrap(samples, direct, diffs, cell, G, H, ref, cfg, results); err != nil {
			return nil, err
		}
	} else {
		for i := range results {
			for _, e := range []*Estimate{&results[i].IPS, &results[i].SNIPS, &results[i].DR} {
				e.Value.Lo, e.Value.Hi = math.NaN(), math.NaN()
				e.Cost.Lo, e.Cost.Hi = math.NaN(), math.NaN()
			}
			if v := results[i].Versus; v != nil {
				for _, iv := range []*abstat.Interval{&v.IPS, &v.SNIPS, &v.DR} {
					iv.Lo, iv.Hi = math.NaN(), math.NaN()
				}
			}
		}
	}

	// Back to grid order.
	out := make([]PolicyResult, 0, len(grid.Taus)*len(grid.MaxHops))
	for _, tau := range grid.Taus {
		j, _ := slices.BinarySearch(taus, tau)
		for _, hv := range grid.MaxHops {
			h, _ := slices.BinarySearch(hops, hv)
			out = append(out, results[j*H+h])
		}
	}
	return out, nil
}

// setVersus sets the point differences to the reference policy (index
// ref, −1 for none) of every supported policy, and clears them when either
// policy has no estimate.
func setVersus(results []PolicyResult, ref int) {
	for i := range results {
		r := &results[i]
		r.Versus = nil
		if ref < 0 || !r.Supported || !results[ref].Supported {
			continue
		}
		b := &results[ref]
		r.Versus = &Versus{Tau: b.Tau, MaxHops: b.MaxHops,
			IPS:   abstat.Interval{Est: r.IPS.Value.Est - b.IPS.Value.Est},
			SNIPS: abstat.Interval{Est: r.SNIPS.Value.Est - b.SNIPS.Value.Est},
			DR:    abstat.Interval{Est: r.DR.Value.Est - b.DR.Value.Est},
		}
	}
}

// sortSearchFloat returns the number of taus ≤ x (taus ascending).
func sortSearchFloat(taus []float64, x float64) int {
	lo, hi := 0, len(taus)
	for lo < hi {
		m := int(uint(lo+hi) >> 1)
		if taus[m] <= x {
			lo = m + 1
		} else {
			hi = m
		}
	}
	return lo
}

// terms fills the per-sample contributions when the target mode is t.
func terms(s *Sample, t Action, m *Binned, floor float64, out *[nTerms]float64) {
	pt := s.Propensity
	if t != s.Logged {
		pt = 1 - s.Propensity
	}
	w := s.Weight
	if t == Chain {
		out[tChain] = w
	}
	if pt < floor {
		out[tUnsup] = 1
		return
	}
	qr, qc := m.Predict(s, t)
	out[tDRR] = w * qr
	out[tDRC] = w * qc
	if t != s.Logged {
		return
	}
	lr, lc := m.Predict(s, s.Logged)
	v := w / pt
	out[tIPSR] = v * s.Reward
	out[tIPSC] = v * s.Cost
	out[tDen] = v
	out[tDRR] += v * (s.Reward - lr)
	out[tDRC] += v * (s.Cost - lc)
	out[tV] = v
	out[tV2] = v * v
}

// aggregate turns bucketed differences into per-policy sums:
// policy (j, h) = base + Σ_{j' ≥ j, h' ≤ h} cell(j', h'). counts, when not
// nil, multiplies each sample's difference (bootstrap); base must then be
// the count-weighted sum of direct terms. O(n + G·H).
func aggregate(base []float64, diffs [][nTerms]float64, cell []int, counts []int32, G, H int) [][nTerms]float64 {
	grid := make([][nTerms]float64, G*H)
	var b [nTerms]float64
	copy(b[:], base)
	for i, c := range cell {
		if c < 0 {
			continue
		}
		k := 1.0
		if counts != nil {
			if counts[i] == 0 {
				continue
			}
			k = float64(counts[i])
		}
		g := &grid[c]
		for t := range nTerms {
			g[t] += k * diffs[i][t]
		}
	}
	// prefix over h (ascending), then suffix over j (descending)
	for j := range G {
		for h := 1; h < H; h++ {
			for t := range nTerms {
				grid[j*H+h][t] += grid[j*H+h-1][t]
			}
		}
	}
	for j := G - 2; j >= 0; j-- {
		for h := range H {
			for t := range nTerms {
				grid[j*H+h][t] += grid[(j+1)*H+h][t]
			}
		}
	}
	for i := range grid {
		for t := range nTerms {
			grid[i][t] += b[t]
		}
	}
	return grid
}

// poisson1CDF is the CDF of Poisson(1) at 0..11.
var poisson1CDF = func() []float64 {
	cdf := make([]float64, 12)
	p, s := math.Exp(-1), 0.0
	for k := range cdf {
		if k > 0 {
			p /= float64(k)
		}
		s += p
		cdf[k] = s
	}
	return cdf
}()

func poisson1(r *rand.Rand) int32 {
	u := r.Float64()
	for k, c := range poisson1CDF {
		if u < c {
			return int32(k)
		}
	}
	return int32(len(poisson1CDF))
}

// bootstrap sets the percentile intervals of every supported policy and,
// with a reference policy (index ref ≥ 0), of the paired differences to
// it. O(reps·(n + G·H)).
func bootstrap(samples []Sample, direct, diffs [][nTerms]float64, cell []int, G, H, ref int, cfg config, results []PolicyResult) error {
	n := len(samples)
	P := G * H
	// replicates[p][e] for e in IPS-V, IPS-C, SNIPS-V, SNIPS-C, DR-V, DR-C
	reps := make([][6][]float64, P)
	// versus[p][e] for e in IPS, SNIPS, DR: value minus the reference's
	versus := make([][3][]float64, P)
	for p := range reps {
		for e := range 6 {
			reps[p][e] = make([]float64, 0, cfg.reps)
		}
	}
	counts := make([]int32, n)
	for b := range cfg.reps {
		rng := rand.New(rand.NewPCG(cfg.seed, uint64(b)+0x9e3779b97f4a7c15))
		var base [nTerms]float64
		var sumW float64
		for i := range counts {
			c := poisson1(rng)
			counts[i] = c
			if c == 0 {
				continue
			}
			k := float64(c)
			sumW += k * samples[i].Weight
			for t := range nTerms {
				base[t] += k * direct[i][t]
			}
		}
		if sumW == 0 {
			continue
		}
		grid := aggregate(base[:], diffs, cell, counts, G, H)
		for p := range P {
			if !results[p].Supported {
				continue
			}
			t := grid[p]
			if ref >= 0 && results[ref].Supported {
				b := grid[ref]
				versus[p][0] = append(versus[p][0], (t[tIPSR]-b[tIPSR])/sumW)
				if t[tDen] > 0 && b[tDen] > 0 {
					versus[p][1] = append(versus[p][1], t[tIPSR]/t[tDen]-b[tIPSR]/b[tDen])
				}
				versus[p][2] = append(versus[p][2], (t[tDRR]-b[tDRR])/sumW)
			}
			reps[p][0] = append(reps[p][0], t[tIPSR]/sumW)
			reps[p][1] = append(reps[p][1], t[tIPSC]/sumW)
			if t[tDen] > 0 {
				reps[p][2] = append(reps[p][2], t[tIPSR]/t[tDen])
				reps[p][3] = append(reps[p][3], t[tIPSC]/t[tDen])
			}
			reps[p][4] = append(reps[p][4], t[tDRR]/sumW)
			reps[p][5] = append(reps[p][5], t[tDRC]/sumW)
		}
	}
	for p := range P {
		r := &results[p]
		if !r.Supported {
			continue
		}
		ivs := []*abstat.Interval{&r.IPS.Value, &r.IPS.Cost, &r.SNIPS.Value, &r.SNIPS.Cost, &r.DR.Value, &r.DR.Cost}
		for e, iv := range ivs {
			if len(reps[p][e]) < cfg.reps/2 {
				r.Supported = false
				r.Reason = "too few usable bootstrap replicates"
				break
			}
			got, err := abstat.PercentileInterval(iv.Est, reps[p][e], cfg.conf)
			if err != nil {
				return err
			}
			*iv = got
		}
	}
	setVersus(results, ref) // a policy may have lost its support above
	for p := range P {
		v := results[p].Versus
		if v == nil {
			continue
		}
		own := []abstat.Interval{results[p].IPS.Value, results[p].SNIPS.Value, results[p].DR.Value}
		base := []abstat.Interval{results[ref].IPS.Value, results[ref].SNIPS.Value, results[ref].DR.Value}
		for e, iv := range []*abstat.Interval{&v.IPS, &v.SNIPS, &v.DR} {
			if len(versus[p][e]) < cfg.reps/2 {
				// Too few replicates usable for both policies at once:
				// the unpaired difference of the two intervals, wider
				// but still an interval.
				iv.Lo, iv.Hi = own[e].Lo-base[e].Hi, own[e].Hi-base[e].Lo
				continue
			}
			got, err := abstat.PercentileInterval(iv.Est, versus[p][e], cfg.conf)
			if err != nil {
				return err
			}
			*iv = got
		}
	}
	return nil
}
