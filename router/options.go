package router

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"

	"github.com/hopwise/hopwise/scorer"
)

// Default bounds and settings. They are engineering choices (common
// practice for bounded best-first search), meant to be tuned per deployment.
const (
	// DefaultGainThreshold is τ_gain: route chain when the estimated error
	// reduction is at least this (on the scale of Σ_v Var; docs/DESIGN.md, Error model).
	DefaultGainThreshold = 0.0
	// DefaultMaxBridges is H, the largest number of bridges in a chain.
	DefaultMaxBridges = 3
	// DefaultBeam is B, the width of the first search layer: the
	// neighbours of each endpoint the meet-in-the-middle beams start from.
	DefaultBeam = 64
	// DefaultFanOut is f, the neighbours each first-layer node is extended
	// by in the second layer. Measured on the evaluation worlds (hopwise
	// eval, local-geometric, seeds 1–5): held-out routed MSE 0.00286 with
	// the former second layer of B paths, 0.00205 at f = 4, 0.00170 at
	// f = 8 and 0.00133 at f = 16 (docs/SEARCH.md).
	DefaultFanOut = 16
	// DefaultMaxCandidates is k, the number of proxy-best chains scored
	// exactly. Measured: k = 4, 8, 16, 32 and 64 give the same held-out
	// MSE on the evaluation worlds, while each exact score costs about
	// 1.5 µs on the 1M-entity benchmark index (docs/SEARCH.md).
	DefaultMaxCandidates = 4
	// DefaultCacheSize is the number of cached decisions.
	DefaultCacheSize = 1 << 16
	// DefaultExpansionBudget bounds the adjacency entries a search may touch
	// (list elements stepped over in intersections, neighbours pulled into a
	// beam, pair statistics looked up).
	DefaultExpansionBudget = 1 << 16
	// MaxBridgesLimit is the largest H the search supports.
	MaxBridgesLimit = 3
	// MaxExploration is the largest exploration rate ε: at ε ≤ 1/2 the
	// policy's preferred mode stays the more likely one.
	MaxExploration = 0.5
)

// ErrBadOption reports an option or configuration value outside its domain.
// Constructors wrap it with the option or field name.
var ErrBadOption = errors.New("router: bad option")

// Fallback says what Decide returns for an unknown endpoint or value.
type Fallback uint8

const (
	// FallbackError (the default) returns ErrUnknownEntity / ErrUnknownValue.
	FallbackError Fallback = iota
	// FallbackDirect returns a direct Decision with a fallback reason.
	FallbackDirect
	// FallbackChain returns a chain-mode Decision (without bridges) with a
	// fallback reason: the gateway should reason step by step on its own.
	FallbackChain
)

// String returns "error", "direct" or "chain".
func (f Fallback) String() string {
	switch f {
	case FallbackError:
		return "error"
	case FallbackDirect:
		return "direct"
	case FallbackChain:
		return "chain"
	}
	return fmt.Sprintf("Fallback(%d)", uint8(f))
}

// ParseFallback parses "error" (or ""), "direct" or "chain".
func ParseFallback(s string) (Fallback, error) {
	switch s {
	case "", "error":
		return FallbackError, nil
	case "direct":
		return FallbackDirect, nil
	case "chain":
		return FallbackChain, nil
	}
	return 0, fmt.Errorf("%w: fallback %q (want error, direct or chain)", ErrBadOption, s)
}

// Arm names of the built-in A/B policies.
const (
	// ArmRouted routes by the gain rule (the product's policy).
	ArmRouted = "routed"
	// ArmDirectOnly always answers directly.
	ArmDirectOnly = "direct-only"
	// ArmChainAlways answers through the best chain whenever one exists.
	ArmChainAlways = "chain-always"
)

// ArmWeight allocates a share of units to an A/B arm.
type ArmWeight struct {
	// Arm is one of ArmRouted, ArmDirectOnly, ArmChainAlways.
	Arm string `json:"arm"`
	// Weight is the arm's relative allocation (finite, ≥ 0); weights are
	// normalised by their sum.
	Weight float64 `json:"weight"`
}

type armPolicy uint8

const (
	policyRouted armPolicy = iota
	policyDirectOnly
	policyChainAlways
)

func parseArm(name string) (armPolicy, bool) {
	switch name {
	case ArmRouted:
		return policyRouted, true
	case ArmDirectOnly:
		return policyDirectOnly, true
	case ArmChainAlways:
		return policyChainAlways, true
	}
	return 0, false
}

type arm struct {
	name   string
	policy armPolicy
	cum    float64 // cumulative normalised weight, upper edge
	share  float64 // normalised weight
}

// settings is the immutable configuration of one config generation.
type settings struct {
	tau          float64
	maxBridges   int
	beam         int
	fanOut       int
	maxCand      int
	model        scorer.Model
	modelSet     bool
	alpha, beta  float64
	betaSet      bool
	fallback     Fallback
	cacheSize    int
	utility      bool
	lambda       float64
	hopCost      float64
	budget       int
	arms         []arm // empty: everyone routed
	epsilon      float64
	exploreSalt  uint64
	k0, k1       uint64 // SipHash key
	gen          uint64 // config generation (set by the router)
	cacheSizeSet bool
	// touched in the current build: alpha/beta given alongside WithModel.
	touchAlpha, touchBeta bool

	// support scores presence-only indexes when no model was set
	// (modelFor).
	support scorer.Model
}

// DefaultHashKey is the SipHash key used for arm assignment and exploration
// when WithHashKey is not given: the bytes of "hopwise-assign-1". Set your
// own key when units could choose their keys to game the assignment.
var DefaultHashKey = [16]byte{'h', 'o', 'p', 'w', 'i', 's', 'e', '-', 'a', 's', 's', 'i', 'g', 'n', '-', '1'}

func defaultSettings() settings {
	return settings{
		tau:        DefaultGainThreshold,
		maxBridges: DefaultMaxBridges,
		beam:       DefaultBeam,
		fanOut:     DefaultFanOut,
		maxCand:    DefaultMaxCandidates,
		alpha:      scorer.DefaultAlpha,
		cacheSize:  DefaultCacheSize,
		budget:     DefaultExpansionBudget,
		lambda:     1,
		k0:         binary.LittleEndian.Uint64(DefaultHashKey[0:8]),
		k1:         binary.LittleEndian.Uint64(DefaultHashKey[8:16]),
	}
}

// Option configures a Router (New, Reconfigure). A nil Option is ignored.
type Option interface {
	apply(*settings) error
}

type optionFunc func(*settings) error

func (f optionFunc) apply(s *settings) error { return f(s) }

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func badOpt(name string, format string, args ...any) error {
	return fmt.Errorf("%w: %s: %s", ErrBadOption, name, fmt.Sprintf(format, args...))
}

// WithGainThreshold sets τ_gain (finite). The routed policy chooses the chain
// when score ≥ τ, where score is the gain (or the utility, see WithUtility).
// Default DefaultGainThreshold.
func WithGainThreshold(tau float64) Option {
	return optionFunc(func(s *settings) error {
		if !finite(tau) {
			return badOpt("WithGainThreshold", "τ must be finite, got %v", tau)
		}
		s.tau = tau
		return nil
	})
}

// WithMaxBridges sets H, the largest number of bridges (0 ≤ H ≤ 3; 0 turns
// the search off). Default 3.
func WithMaxBridges(h int) Option {
	return optionFunc(func(s *settings) error {
		if h < 0 || h > MaxBridgesLimit {
			return badOpt("WithMaxBridges", "H must be in [0, %d], got %d", MaxBridgesLimit, h)
		}
		s.maxBridges = h
		return nil
	})
}

// WithBeam sets B, the width of the first search layer: the B best-ranked
// (highest-support) neighbours of each endpoint (1 ≤ B ≤ 1<<20). Default
// DefaultBeam.
func WithBeam(b int) Option {
	return optionFunc(func(s *settings) error {
		if b < 1 || b > 1<<20 {
			return badOpt("WithBeam", "B must be in [1, %d], got %d", 1<<20, b)
		}
		s.beam = b
		return nil
	})
}

// WithFanOut sets f, the fan-out of the second search layer: every
// first-layer node is extended by its f best-ranked neighbours, so a
// second layer holds at most B·f two-hop paths (1 ≤ f ≤ 1<<20). Default
// DefaultFanOut.
func WithFanOut(f int) Option {
	return optionFunc(func(s *settings) error {
		if f < 1 || f > 1<<20 {
			return badOpt("WithFanOut", "f must be in [1, %d], got %d", 1<<20, f)
		}
		s.fanOut = f
		return nil
	})
}

// WithMaxCandidates sets k, the number of proxy-best candidate chains that
// are scored exactly (1 ≤ k ≤ 1<<16). Default DefaultMaxCandidates.
func WithMaxCandidates(k int) Option {
	return optionFunc(func(s *settings) error {
		if k < 1 || k > 1<<16 {
			return badOpt("WithMaxCandidates", "k must be in [1, %d], got %d", 1<<16, k)
		}
		s.maxCand = k
		return nil
	})
}

// WithModel sets the error model. Default: scorer.NewBayes with WithAlpha /
// WithBeta when given, else the scorer defaults, except on a presence-only
// index (scorer.PresenceOnly), which without WithModel is scored by
// scorer.NewSupport with its defaults (chosen per index at New and Swap).
// A nil model is an error.
// The search relies on EdgeCost ≥ 0 and on a chain's Err ≥ HopBias()·m, as
// both scorer models guarantee; EdgeCost need not be monotone in support.
func WithModel(m scorer.Model) Option {
	return optionFunc(func(s *settings) error {
		if m == nil {
			return badOpt("WithModel", "nil model")
		}
		s.model, s.modelSet = m, true
		return nil
	})
}

// WithAlpha sets the Dirichlet pseudo-count α of the default Bayes model
// (finite, > 0). It conflicts with WithModel.
func WithAlpha(alpha float64) Option {
	return optionFunc(func(s *settings) error {
		if !finite(alpha) || alpha <= 0 {
			return badOpt("WithAlpha", "α must be finite and > 0, got %v", alpha)
		}
		s.alpha, s.touchAlpha = alpha, true
		return nil
	})
}

// WithBeta sets the per-hop squared-bias β of the default Bayes model
// (finite, ≥ 0; default scorer.DefaultBeta). It conflicts with WithModel.
func WithBeta(beta float64) Option {
	return optionFunc(func(s *settings) error {
		if !finite(beta) || beta < 0 {
			return badOpt("WithBeta", "β must be finite and ≥ 0, got %v", beta)
		}
		s.beta, s.betaSet, s.touchBeta = beta, true, true
		return nil
	})
}

// WithFallback makes Decide answer queries with an unknown endpoint or value
// with a Decision in the given mode (reason unknown-entity-fallback or
// unknown-value-fallback) instead of an error. Default: errors.
func WithFallback(m Mode) Option {
	return optionFunc(func(s *settings) error {
		switch m {
		case ModeDirect:
			s.fallback = FallbackDirect
		case ModeChain:
			s.fallback = FallbackChain
		default:
			return badOpt("WithFallback", "invalid mode %d", uint8(m))
		}
		return nil
	})
}

// WithoutFallback restores the default: unknown endpoints are errors.
func WithoutFallback() Option {
	return optionFunc(func(s *settings) error { s.fallback = FallbackError; return nil })
}

// WithCacheSize sets the decision-cache capacity (0 disables the cache,
// at most 1<<26). Default 65536. It only takes effect in New.
func WithCacheSize(n int) Option {
	return optionFunc(func(s *settings) error {
		if n < 0 || n > 1<<26 {
			return badOpt("WithCacheSize", "size must be in [0, %d], got %d", 1<<26, n)
		}
		s.cacheSize, s.cacheSizeSet = n, true
		return nil
	})
}

// WithUtility switches the routed policy to the utility form
// score = λ·gain − c_hop·m (m = bridges of the best chain): chains are ranked
// by that score and chosen when it is ≥ τ. λ > 0 and c_hop ≥ 0, finite.
func WithUtility(lambda, hopCost float64) Option {
	return optionFunc(func(s *settings) error {
		if !finite(lambda) || lambda <= 0 {
			return badOpt("WithUtility", "λ must be finite and > 0, got %v", lambda)
		}
		if !finite(hopCost) || hopCost < 0 {
			return badOpt("WithUtility", "hop cost must be finite and ≥ 0, got %v", hopCost)
		}
		s.utility, s.lambda, s.hopCost = true, lambda, hopCost
		return nil
	})
}

// WithExpansionBudget bounds the adjacency entries one search may touch
// (1 ≤ n ≤ 1<<30). Default DefaultExpansionBudget.
func WithExpansionBudget(n int) Option {
	return optionFunc(func(s *settings) error {
		if n < 1 || n > 1<<30 {
			return badOpt("WithExpansionBudget", "budget must be in [1, %d], got %d", 1<<30, n)
		}
		s.budget = n
		return nil
	})
}

// WithArms enables A/B assignment over the given arms. Every arm name must
// be one of ArmRouted, ArmDirectOnly, ArmChainAlways, appear once, and have a
// finite weight ≥ 0; the weights must sum to > 0. Units (Query.Key) are
// assigned by a keyed hash, see WithHashKey. No arms (the default) means
// every query is routed and Decision.Arm is "".
func WithArms(arms ...ArmWeight) Option {
	return optionFunc(func(s *settings) error {
		if len(arms) == 0 {
			s.arms = nil
			return nil
		}
		var sum float64
		seen := map[string]bool{}
		for i, a := range arms {
			if _, ok := parseArm(a.Arm); !ok {
				return badOpt("WithArms", "arm %d: unknown arm %q (want %s, %s or %s)", i, a.Arm, ArmRouted, ArmDirectOnly, ArmChainAlways)
			}
			if seen[a.Arm] {
				return badOpt("WithArms", "arm %q listed twice", a.Arm)
			}
			seen[a.Arm] = true
			if !finite(a.Weight) || a.Weight < 0 {
				return badOpt("WithArms", "arm %q: weight must be finite and ≥ 0, got %v", a.Arm, a.Weight)
			}
			sum += a.Weight
		}
		if !(sum > 0) || math.IsInf(sum, 0) {
			return badOpt("WithArms", "weights must sum to a finite value > 0, got %v", sum)
		}
		out := make([]arm, 0, len(arms))
		var cum float64
		for _, a := range arms {
			p, _ := parseArm(a.Arm)
			share := a.Weight / sum
			cum += share
			out = append(out, arm{name: a.Arm, policy: p, share: share, cum: cum})
		}
		out[len(out)-1].cum = 1 // absorb rounding
		s.arms = out
		return nil
	})
}

// WithExploration sets the exploration rate ε ∈ [0, 1/2] and the salt that
// makes the exploration draw independent of the arm draw. In the routed
// policy, with probability ε (a deterministic draw from the unit key) the
// decision takes the mode the policy did not prefer; Decision.Propensity is
// then ε, otherwise 1−ε. When only one mode is possible (no chain found) the
// propensity is 1. ε = 0 disables exploration.
func WithExploration(epsilon float64, salt string) Option {
	return optionFunc(func(s *settings) error {
		if !finite(epsilon) || epsilon < 0 || epsilon > MaxExploration {
			return badOpt("WithExploration", "ε must be in [0, %v], got %v", MaxExploration, epsilon)
		}
		s.epsilon = epsilon
		s.exploreSalt = saltOf(salt)
		return nil
	})
}

// WithHashKey sets the 16-byte SipHash-2-4 key of the unit assignment
// (arms and exploration). Default DefaultHashKey.
func WithHashKey(key []byte) Option {
	return optionFunc(func(s *settings) error {
		if len(key) != 16 {
			return badOpt("WithHashKey", "key must be 16 bytes, got %d", len(key))
		}
		s.k0 = binary.LittleEndian.Uint64(key[0:8])
		s.k1 = binary.LittleEndian.Uint64(key[8:16])
		return nil
	})
}

// saltOf folds a salt string into 64 bits (FNV-1a, common practice).
func saltOf(s string) uint64 {
	h := uint64(14695981039346656037)
	for i := 0; i < len(s); i++ {
		h ^= uint64(s[i])
		h *= 1099511628211
	}
	return h
}

// buildSettings applies opts over base and finishes the model.
func buildSettings(base settings, opts []Option) (settings, error) {
	s := base
	s.arms = append([]arm(nil), base.arms...)
	s.touchAlpha, s.touchBeta = false, false
	rebuild := !s.modelSet
	for _, o := range opts {
		if o == nil {
			continue
		}
		if err := o.apply(&s); err != nil {
			return settings{}, err
		}
	}
	if s.modelSet && (s.touchAlpha || s.touchBeta) {
		return settings{}, badOpt("WithModel", "conflicts with WithAlpha/WithBeta (configure the model itself)")
	}
	if !s.modelSet && (rebuild || s.touchAlpha || s.touchBeta || s.model == nil) {
		var mopts []scorer.Option
		mopts = append(mopts, scorer.WithAlpha(s.alpha))
		if s.betaSet {
			mopts = append(mopts, scorer.WithBeta(s.beta))
		}
		m, err := scorer.NewBayes(mopts...)
		if err != nil {
			return settings{}, fmt.Errorf("%w: default model: %v", ErrBadOption, err)
		}
		s.model = m
		if s.support, err = scorer.NewSupport(scorer.WithAlpha(s.alpha)); err != nil {
			return settings{}, fmt.Errorf("%w: default presence-only model: %v", ErrBadOption, err)
		}
	}
	return s, nil
}

// modelFor is the model that scores decisions on h: the configured one, or
// without WithModel the Support model (scorer defaults) when h's index is
// presence-only (scorer.PresenceOnly) and the Bayes model otherwise. O(1).
func (s *settings) modelFor(h *handle) scorer.Model {
	if h.presence && !s.modelSet && s.support != nil {
		return s.support
	}
	return s.model
}
