package router

import (
	"encoding/hex"
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
	// DefaultParallelBridges lets the parallel answer through two bridges
	// compete with the chains (docs/QUALITY.md §4e): where no table tells
	// which of two structures the pair tables fit, it answers their
	// midpoint, which the published networks and the fit worlds measure
	// better than either answer alone.
	DefaultParallelBridges = true
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

// settings is the immutable configuration of one config generation: the
// Config the options set (the one source of truth), the model given by
// WithModel, and the values compile derives from them for the hot path.
type settings struct {
	cfg    Config       // what the options set; Config.Validate checks it
	custom scorer.Model // WithModel; nil = the models cfg describes
	hooks  *searchHooks // tests only

	// Derived by compile; never set by an option.
	tau         float64
	maxBridges  int
	beam        int
	fanOut      int
	maxCand     int
	fallback    Fallback
	cacheSize   int
	utility     bool
	lambda      float64
	hopCost     float64
	budget      int
	arms        []arm // empty: everyone routed
	epsilon     float64
	exploreSalt uint64
	k0, k1      uint64 // SipHash key
	gen         uint64 // config generation (set by the router)

	// model scores valued indexes (and every index when forced); support
	// scores presence-only indexes otherwise (modelFor).
	model, support scorer.Model
	forced         bool
}

// DefaultHashKey is the SipHash key used for arm assignment and exploration
// when WithHashKey is not given: the bytes of "hopwise-assign-1". Set your
// own key when units could choose their keys to game the assignment.
var DefaultHashKey = [16]byte{'h', 'o', 'p', 'w', 'i', 's', 'e', '-', 'a', 's', 's', 'i', 'g', 'n', '-', '1'}

// draft is what the options edit: the configuration and the custom model.
type draft struct {
	cfg    Config
	custom scorer.Model
	hooks  *searchHooks
}

// searchHooks instrument the search for tests; nil otherwise.
type searchHooks struct {
	noLayerPruning bool   // liveNodes never prunes
	layerPruned    func() // called when liveNodes prunes
	// alt selects the alternative code path of a one-process A/B
	// comparison (TestSearchAB): where a round of speed work keeps the
	// code it replaces, that code runs when alt is set (scratch.alt), so
	// that both can be timed and compared decision by decision in one
	// process on one index. Production routers never set it.
	alt bool
}

// Option configures a Router (New, Reconfigure): each option sets fields of
// the router's Config (named in its doc), and the result is validated once
// by Config.Validate, whose error names the field and the option. A nil
// Option is ignored.
type Option interface {
	apply(*draft)
}

type optionFunc func(*draft)

func (f optionFunc) apply(d *draft) { f(d) }

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

func badOpt(name string, format string, args ...any) error {
	return fmt.Errorf("%w: %s: %s", ErrBadOption, name, fmt.Sprintf(format, args...))
}

// WithGainThreshold sets "gain_threshold", τ_gain (finite). The routed
// policy chooses the chain when score ≥ τ, where score is the gain (or the
// utility, see WithUtility). Default DefaultGainThreshold.
func WithGainThreshold(tau float64) Option {
	return optionFunc(func(d *draft) { d.cfg.GainThreshold = tau })
}

// WithMaxBridges sets "max_bridges", H, the largest number of bridges
// (0 ≤ H ≤ 3; 0 turns the search off). Default 3.
func WithMaxBridges(h int) Option {
	return optionFunc(func(d *draft) { d.cfg.MaxBridges = h })
}

// WithBeam sets "beam", B, the width of the first search layer: the B
// best-ranked (highest-support) neighbours of each endpoint
// (1 ≤ B ≤ 1<<20). Default DefaultBeam.
func WithBeam(b int) Option {
	return optionFunc(func(d *draft) { d.cfg.Beam = b })
}

// WithFanOut sets "fan_out", f, the fan-out of the second search layer:
// every first-layer node is extended by its f best-ranked neighbours, so a
// second layer holds at most B·f two-hop paths (1 ≤ f ≤ 1<<20; 0 means
// DefaultFanOut, as an absent "fan_out" does). Default DefaultFanOut.
func WithFanOut(f int) Option {
	return optionFunc(func(d *draft) { d.cfg.FanOut = f })
}

// WithMaxCandidates sets "max_candidates", k, the number of proxy-best
// candidate chains that are scored exactly (1 ≤ k ≤ 1<<16). Default
// DefaultMaxCandidates.
func WithMaxCandidates(k int) Option {
	return optionFunc(func(d *draft) { d.cfg.MaxCandidates = k })
}

// WithModel sets the error model, built by the caller (scorer.New,
// scorer.NewBayes, ...). Without it the router builds the model its Config
// describes ("error_model", "alpha", "beta", ...): the Bayes model, except
// on a presence-only index (scorer.PresenceOnly), which is scored by the
// Support model (chosen per index at New and Swap) unless "error_model" is
// "support". WithModel conflicts with model fields that differ from
// DefaultConfig (configure the model itself). A nil model is an error.
// The search relies on EdgeCost ≥ 0 and on a chain's Err ≥ HopBias()·m, as
// both scorer models guarantee; EdgeCost need not be monotone in support.
func WithModel(m scorer.Model) Option {
	return optionFunc(func(d *draft) {
		if m == nil {
			d.custom = nilModel{}
			return
		}
		d.custom = m
	})
}

// nilModel marks WithModel(nil), which compile rejects.
type nilModel struct{ scorer.Model }

// WithAlpha sets "alpha", the Dirichlet pseudo-count α of the configured
// model (finite, > 0). It conflicts with WithModel.
func WithAlpha(alpha float64) Option {
	return optionFunc(func(d *draft) { d.cfg.Alpha = alpha })
}

// WithBeta sets "beta", the per-hop squared bias β of the configured model
// (finite, ≥ 0; default scorer.DefaultBeta). It conflicts with WithModel.
func WithBeta(beta float64) Option {
	return optionFunc(func(d *draft) { d.cfg.Beta = beta })
}

// WithFallback sets "unknown_entity": Decide answers queries with an unknown
// endpoint or value with a Decision in the given mode (reason
// unknown-entity-fallback or unknown-value-fallback) instead of an error.
// Default: errors.
func WithFallback(m Mode) Option {
	return optionFunc(func(d *draft) { d.cfg.Fallback = m.String() })
}

// WithoutFallback restores the default: unknown endpoints are errors
// ("unknown_entity": "error").
func WithoutFallback() Option {
	return optionFunc(func(d *draft) { d.cfg.Fallback = FallbackError.String() })
}

// WithCacheSize sets "cache_size", the decision-cache capacity (0 disables
// the cache, at most 1<<26). Default 65536. It only takes effect in New.
func WithCacheSize(n int) Option {
	return optionFunc(func(d *draft) { d.cfg.CacheSize = n })
}

// WithUtility sets "utility_lambda" and "hop_cost": the routed policy takes
// the utility form score = λ·gain − c_hop·m (m = bridges of the best chain):
// chains are ranked by that score and chosen when it is ≥ τ. λ > 0 and
// c_hop ≥ 0, finite; WithUtility(0, 0) turns the utility form off.
func WithUtility(lambda, hopCost float64) Option {
	return optionFunc(func(d *draft) { d.cfg.UtilityLambda, d.cfg.HopCost = lambda, hopCost })
}

// WithExpansionBudget sets "expansion_budget", the bound on the adjacency
// entries one search may touch (1 ≤ n ≤ 1<<30). Default
// DefaultExpansionBudget.
func WithExpansionBudget(n int) Option {
	return optionFunc(func(d *draft) { d.cfg.ExpansionBudget = n })
}

// WithArms sets "arms", enabling A/B assignment over the given arms. Every
// arm name must be one of ArmRouted, ArmDirectOnly, ArmChainAlways, appear
// once, and have a finite weight ≥ 0; the weights must sum to > 0. Units
// (Query.Key) are assigned by a keyed hash, see WithHashKey. No arms (the
// default) means every query is routed and Decision.Arm is "".
func WithArms(arms ...ArmWeight) Option {
	arms = append([]ArmWeight(nil), arms...)
	return optionFunc(func(d *draft) { d.cfg.Arms = arms })
}

// WithExploration sets "exploration", the rate ε ∈ [0, 1/2], and
// "exploration_salt", the salt that makes the exploration draw independent
// of the arm draw. In the routed policy, with probability ε (a deterministic
// draw from the unit key) the decision takes the mode the policy did not
// prefer; Decision.Propensity is then ε, otherwise 1−ε. When only one mode
// is possible (no chain found) the propensity is 1. ε = 0 disables
// exploration.
func WithExploration(epsilon float64, salt string) Option {
	return optionFunc(func(d *draft) { d.cfg.Exploration, d.cfg.ExplorationSalt = epsilon, salt })
}

// WithParallelBridges sets "parallel_bridges": whether the parallel answer
// through the two strongest one-bridge candidates (ChainResult.Parallel,
// docs/QUALITY.md §4e) competes with the chains on estimated error. Default
// true (DefaultParallelBridges). It needs a model that implements scorer.ParallelBridger (the
// Bayes model); with another model it has no effect.
func WithParallelBridges(on bool) Option {
	return optionFunc(func(d *draft) { d.cfg.ParallelBridges = on })
}

// WithHashKey sets "hash_key", the 16-byte SipHash-2-4 key of the unit
// assignment (arms and exploration). Default DefaultHashKey.
func WithHashKey(key []byte) Option {
	hk := hex.EncodeToString(key)
	if len(key) != 16 {
		hk = fmt.Sprintf("(%d bytes)", len(key)) // refused by Validate
	}
	return optionFunc(func(d *draft) { d.cfg.HashKey = hk })
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

// buildSettings applies opts over base's configuration and compiles the
// result.
func buildSettings(base settings, opts []Option) (settings, error) {
	d := draft{cfg: base.cfg, custom: base.custom, hooks: base.hooks}
	d.cfg.Arms = append([]ArmWeight(nil), base.cfg.Arms...)
	for _, o := range opts {
		if o != nil {
			o.apply(&d)
		}
	}
	return d.compile()
}

// modelFor is the model that scores decisions on h: the configured one
// (WithModel or "error_model": "support"), or else the Support model when
// h's index is presence-only (scorer.PresenceOnly) and the Bayes model
// otherwise. O(1).
func (s *settings) modelFor(h *handle) scorer.Model {
	if h.presence && !s.forced {
		return s.support
	}
	return s.model
}
