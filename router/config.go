package router

import (
	"bytes"
	"cmp"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strings"

	"github.com/hopwise/hopwise/internal/atomicfile"
	"github.com/hopwise/hopwise/scorer"
)

// Config is the router's configuration, the one source of truth: the
// options (WithBeam, WithAlpha, ...) set its fields, Validate checks them
// all in one place, and it is the file form read by LoadConfig, written by
// SaveConfig (and by `hopwise tune`). Format: one JSON object; every field
// is optional and defaults to DefaultConfig; unknown fields are rejected.
// Example:
//
//	{
//	  "gain_threshold": 0.002,      // τ_gain, finite
//	  "max_bridges": 3,             // H in [0, 3]
//	  "beam": 64,                   // B in [1, 2^20]
//	  "fan_out": 16,                // f in [1, 2^20]; 0 or absent = DefaultFanOut
//	  "max_candidates": 4,          // k in [1, 2^16]
//	  "error_model": "bayes",       // "bayes" (support on presence-only indexes) or "support"
//	  "alpha": 1,                   // Dirichlet α > 0 (bayes; smoothing for support)
//	  "hop_alpha": 0.5,             // bayes: Dirichlet α > 0 of a chain's hop tables
//	  "beta": 0.001,                // per-hop squared bias β ≥ 0
//	  "signal_z": 1,                // bayes: z ≥ 0 of the edge-cost signal bound
//	  "missing_gamma": 5.881,       // bayes: γ ≥ 0 of the missing-signal bias γ·(δ − L)₊²
//	  "missing_delta": 0.125,       // bayes: δ in [0, 1] of the same
//	  "prior_strength": 3.2,        // bayes: A > 0 of the direct estimate's prior
//	  "unseen_spread": 0.694,       // bayes: η ≥ 0 of the unobserved-pair error
//	  "separation": 1,              // bayes: λ ≥ 0 of the separation bias (0 = off)
//	  "noise_k": 1,                 // bayes: k ≥ 0 of the gain margin (0 = off)
//	  "chain_variance": "delta",    // bayes: "delta" (delta method; "" too) or "exact" (exact moments)
//	  "support_v0": 0.25,           // support model v0 > 0 (0 = scorer default)
//	  "support_n0": 1,              // support model n0 > 0 (0 = scorer default)
//	  "unknown_entity": "error",    // unknown endpoints: "error", "direct" or "chain"
//	  "cache_size": 65536,          // decisions cached, 0 disables
//	  "utility_lambda": 0,          // > 0 turns on score = λ·gain − hop_cost·m
//	  "hop_cost": 0,                // c_hop ≥ 0 (needs utility_lambda > 0)
//	  "expansion_budget": 65536,    // adjacency entries per search, ≥ 1
//	  "exploration": 0,             // ε in [0, 0.5]
//	  "exploration_salt": "",       // separates exploration from arm draws
//	  "arms": [{"arm": "routed", "weight": 0.9}, {"arm": "direct-only", "weight": 0.1}],
//	  "hash_key": "",               // 32 hex digits (16-byte SipHash key), "" = DefaultHashKey
//	  "parallel_bridges": true      // bayes: let the parallel answer through two bridges compete (docs/QUALITY.md §4e)
//	}
//
// (JSON has no comments; they are annotations here.) The Bayes model's
// constants (signal_z … chain_variance) default to the scorer's fitted
// values (scorer.DefaultBayesConfig) and must keep them under
// "error_model": "support"; support_v0 and support_n0 need "support".
// "error_model" and "unknown_entity" were called "model" and "fallback"
// before; a file that still uses an old name is rejected with an error
// naming the new field. The "beta" field is the β of whichever model is
// chosen; its default is the Bayes model's scorer.DefaultBeta, so a
// "support" configuration should set it (the support model's own fit is
// scorer.DefaultSupportBeta).
type Config struct {
	GainThreshold   float64     `json:"gain_threshold"`
	MaxBridges      int         `json:"max_bridges"`
	Beam            int         `json:"beam"`
	FanOut          int         `json:"fan_out,omitempty"`
	MaxCandidates   int         `json:"max_candidates"`
	Model           string      `json:"error_model"`
	Alpha           float64     `json:"alpha"`
	HopAlpha        float64     `json:"hop_alpha"`
	Beta            float64     `json:"beta"`
	SignalZ         float64     `json:"signal_z"`
	MissingGamma    float64     `json:"missing_gamma"`
	MissingDelta    float64     `json:"missing_delta"`
	PriorStrength   float64     `json:"prior_strength"`
	UnseenSpread    float64     `json:"unseen_spread"`
	Separation      float64     `json:"separation"`
	NoiseK          float64     `json:"noise_k"`
	ChainVariance   string      `json:"chain_variance"`
	SupportV0       float64     `json:"support_v0"`
	SupportN0       float64     `json:"support_n0"`
	Fallback        string      `json:"unknown_entity"`
	CacheSize       int         `json:"cache_size"`
	UtilityLambda   float64     `json:"utility_lambda"`
	HopCost         float64     `json:"hop_cost"`
	ExpansionBudget int         `json:"expansion_budget"`
	Exploration     float64     `json:"exploration"`
	ExplorationSalt string      `json:"exploration_salt"`
	Arms            []ArmWeight `json:"arms"`
	HashKey         string      `json:"hash_key"`
	// ParallelBridges lets the parallel answer (two bridges read side by
	// side, ChainResult.Parallel) compete with the chains
	// (DefaultParallelBridges; docs/QUALITY.md §4e).
	ParallelBridges bool `json:"parallel_bridges"`
}

// DefaultConfig returns the configuration New uses without options. The
// model fields are scorer.DefaultBayesConfig's.
func DefaultConfig() Config {
	b := scorer.DefaultBayesConfig()
	return Config{
		GainThreshold:   DefaultGainThreshold,
		MaxBridges:      DefaultMaxBridges,
		Beam:            DefaultBeam,
		FanOut:          DefaultFanOut,
		MaxCandidates:   DefaultMaxCandidates,
		Model:           scorer.ModelBayes,
		Alpha:           b.Alpha,
		HopAlpha:        b.HopAlpha,
		Beta:            b.Beta,
		SignalZ:         b.SignalZ,
		MissingGamma:    b.MissingGamma,
		MissingDelta:    b.MissingDelta,
		PriorStrength:   b.PriorStrength,
		UnseenSpread:    b.UnseenSpread,
		Separation:      b.Separation,
		NoiseK:          b.NoiseK,
		ChainVariance:   b.Variance.String(),
		Fallback:        FallbackError.String(),
		CacheSize:       DefaultCacheSize,
		ExpansionBudget: DefaultExpansionBudget,
		ParallelBridges: DefaultParallelBridges,
	}
}

func defaultSettings() settings { return settings{cfg: DefaultConfig()} }

// configError names the JSON field of a bad value and the option that sets
// it; it wraps ErrBadOption.
func configError(field, format string, args ...any) error {
	opt := optionOf[field]
	if opt != "" {
		opt = " (" + opt + ")"
	}
	return fmt.Errorf("%w: field %q%s: %s", ErrBadOption, field, opt, fmt.Sprintf(format, args...))
}

// optionOf names the router option that sets each field ("" when only the
// file, or WithModel, sets it).
var optionOf = map[string]string{
	"gain_threshold": "WithGainThreshold", "max_bridges": "WithMaxBridges", "beam": "WithBeam",
	"fan_out": "WithFanOut", "max_candidates": "WithMaxCandidates", "alpha": "WithAlpha", "beta": "WithBeta",
	"unknown_entity": "WithFallback", "cache_size": "WithCacheSize", "utility_lambda": "WithUtility",
	"hop_cost": "WithUtility", "expansion_budget": "WithExpansionBudget", "exploration": "WithExploration",
	"arms": "WithArms", "hash_key": "WithHashKey", "parallel_bridges": "WithParallelBridges",
}

// modelFields lists the Config's model fields: the JSON name, the
// scorer.FieldError field it maps to, whether only the Bayes model reads
// it, and its value (compared with DefaultConfig's). A new scorer constant
// adds one row here.
var modelFields = []struct {
	json, scorer string
	bayesOnly    bool
	get          func(*Config) any
}{
	{"error_model", "Name", false, func(c *Config) any { return cmp.Or(c.Model, scorer.ModelBayes) }},
	{"alpha", "Alpha", false, func(c *Config) any { return c.Alpha }},
	{"hop_alpha", "HopAlpha", true, func(c *Config) any { return c.HopAlpha }},
	{"beta", "Beta", false, func(c *Config) any { return c.Beta }},
	{"signal_z", "SignalZ", true, func(c *Config) any { return c.SignalZ }},
	{"missing_gamma", "MissingGamma", true, func(c *Config) any { return c.MissingGamma }},
	{"missing_delta", "MissingDelta", true, func(c *Config) any { return c.MissingDelta }},
	{"prior_strength", "PriorStrength", true, func(c *Config) any { return c.PriorStrength }},
	{"unseen_spread", "UnseenSpread", true, func(c *Config) any { return c.UnseenSpread }},
	{"separation", "Separation", true, func(c *Config) any { return c.Separation }},
	{"noise_k", "NoiseK", true, func(c *Config) any { return c.NoiseK }},
	{"chain_variance", "Variance", true, func(c *Config) any { return cmp.Or(c.ChainVariance, scorer.DeltaMethod.String()) }},
	{"support_v0", "V0", false, func(c *Config) any { return c.SupportV0 }},
	{"support_n0", "N0", false, func(c *Config) any { return c.SupportN0 }},
}

// jsonOfScorerField returns the JSON name of a scorer.FieldError field.
func jsonOfScorerField(f string) string {
	for _, m := range modelFields {
		if m.scorer == f {
			return m.json
		}
	}
	return f
}

// span is an inclusive integer domain.
type span struct {
	field, sym string
	v          int
	lo, hi     int
}

// modelConfig returns the scorer configuration the model fields describe,
// or an error naming the first bad field. O(1).
func (c Config) modelConfig() (scorer.ModelConfig, error) {
	m := scorer.DefaultModelConfig()
	def := DefaultConfig()
	switch c.Model {
	case "", scorer.ModelBayes:
		m.Name = scorer.ModelBayes
		if c.SupportV0 != 0 || c.SupportN0 != 0 {
			return m, configError("support_v0", "support_v0/support_n0 need error_model %q", scorer.ModelSupport)
		}
	case scorer.ModelSupport:
		m.Name = scorer.ModelSupport
		for _, f := range modelFields {
			if v := f.get(&c); f.bayesOnly && v != f.get(&def) {
				return m, configError(f.json, "applies to error_model %q only (got %v with %q)", scorer.ModelBayes, v, c.Model)
			}
		}
		m.Support.Beta = c.Beta
		if c.SupportV0 != 0 {
			m.Support.V0 = c.SupportV0
		}
		if c.SupportN0 != 0 {
			m.Support.N0 = c.SupportN0
		}
	default:
		return m, configError("error_model", "unknown model %q (want %s or %s)", c.Model, scorer.ModelBayes, scorer.ModelSupport)
	}
	switch c.ChainVariance {
	case "", scorer.DeltaMethod.String():
		m.Bayes.Variance = scorer.DeltaMethod
	case scorer.ExactMoments.String():
		m.Bayes.Variance = scorer.ExactMoments
	default:
		return m, configError("chain_variance", "unknown method %q (want %s or %s)", c.ChainVariance, scorer.DeltaMethod, scorer.ExactMoments)
	}
	b := &m.Bayes
	b.Alpha, b.HopAlpha, b.Beta, b.SignalZ, b.MissingGamma, b.MissingDelta = c.Alpha, c.HopAlpha, c.Beta, c.SignalZ, c.MissingGamma, c.MissingDelta
	b.PriorStrength, b.UnseenSpread, b.Separation, b.NoiseK = c.PriorStrength, c.UnseenSpread, c.Separation, c.NoiseK
	m.Support.Alpha = c.Alpha
	// The Bayes constants are checked under either name (under "support"
	// they are the defaults), and so are the support model's.
	for _, err := range []error{b.Validate(), m.Support.Validate()} {
		var fe *scorer.FieldError
		if errors.As(err, &fe) {
			return m, configError(jsonOfScorerField(fe.Field), "%s", fe.Msg)
		} else if err != nil {
			return m, fmt.Errorf("%w: %v", ErrBadOption, err)
		}
	}
	return m, nil
}

// compile validates the draft and derives the settings the hot path reads:
// the one validation of every router setting. An error names the JSON field
// and the option that sets it, and wraps ErrBadOption. O(arms).
func (d draft) compile() (settings, error) {
	c := d.cfg
	s := settings{cfg: c, custom: d.custom, hooks: d.hooks}
	for _, f := range []struct {
		field string
		v     float64
		ok    bool
		want  string
	}{
		{"gain_threshold", c.GainThreshold, finite(c.GainThreshold), "τ must be finite"},
		{"utility_lambda", c.UtilityLambda, finite(c.UtilityLambda) && c.UtilityLambda >= 0, "λ must be finite and > 0 (0 = no utility)"},
		{"hop_cost", c.HopCost, finite(c.HopCost) && c.HopCost >= 0, "hop cost must be finite and ≥ 0"},
		{"hop_cost", c.HopCost, c.HopCost == 0 || c.UtilityLambda > 0, "hop_cost needs utility_lambda > 0"},
		{"exploration", c.Exploration, finite(c.Exploration) && c.Exploration >= 0 && c.Exploration <= MaxExploration, fmt.Sprintf("ε must be in [0, %v]", MaxExploration)},
	} {
		if !f.ok {
			return settings{}, configError(f.field, "%s, got %v", f.want, f.v)
		}
	}
	for _, f := range []span{
		{"max_bridges", "H", c.MaxBridges, 0, MaxBridgesLimit},
		{"beam", "B", c.Beam, 1, 1 << 20},
		{"fan_out", "f", c.FanOut, 0, 1 << 20},
		{"max_candidates", "k", c.MaxCandidates, 1, 1 << 16},
		{"cache_size", "size", c.CacheSize, 0, 1 << 26},
		{"expansion_budget", "budget", c.ExpansionBudget, 1, 1 << 30},
	} {
		if f.v < f.lo || f.v > f.hi {
			return settings{}, configError(f.field, "%s must be in [%d, %d], got %d", f.sym, f.lo, f.hi, f.v)
		}
	}
	var err error
	if s.fallback, err = ParseFallback(c.Fallback); err != nil {
		return settings{}, configError("unknown_entity", "%q (want error, direct or chain)", c.Fallback)
	}
	if s.arms, err = compileArms(c.Arms); err != nil {
		return settings{}, err
	}
	key := DefaultHashKey[:]
	if c.HashKey != "" {
		if key, err = hex.DecodeString(c.HashKey); err != nil || len(key) != 16 {
			return settings{}, configError("hash_key", "want 32 hex digits (a 16-byte key), got %q", c.HashKey)
		}
	}
	s.k0, s.k1 = binary.LittleEndian.Uint64(key[0:8]), binary.LittleEndian.Uint64(key[8:16])
	s.tau, s.maxBridges, s.beam, s.fanOut, s.maxCand = c.GainThreshold, c.MaxBridges, c.Beam, c.FanOut, c.MaxCandidates
	if s.fanOut == 0 {
		s.fanOut = DefaultFanOut
	}
	s.cacheSize, s.budget = c.CacheSize, c.ExpansionBudget
	s.utility, s.lambda, s.hopCost = c.UtilityLambda > 0, 1, c.HopCost
	if s.utility {
		s.lambda = c.UtilityLambda
	}
	s.epsilon, s.exploreSalt = c.Exploration, saltOf(c.ExplorationSalt)

	mc, err := c.modelConfig()
	if err != nil {
		return settings{}, err
	}
	if d.custom != nil {
		if _, isNil := d.custom.(nilModel); isNil {
			return settings{}, badOpt("WithModel", "nil model")
		}
		if err := modelFieldsDefault(c); err != nil {
			return settings{}, err
		}
		s.model, s.forced = d.custom, true
		return s, nil
	}
	if s.model, err = scorer.New(mc); err != nil {
		return settings{}, fmt.Errorf("%w: error model: %v", ErrBadOption, err)
	}
	s.forced = mc.Name == scorer.ModelSupport
	if !s.forced {
		if s.support, err = scorer.NewSupportFrom(mc.Support); err != nil {
			return settings{}, fmt.Errorf("%w: presence-only model: %v", ErrBadOption, err)
		}
	}
	return s, nil
}

// modelFieldsDefault reports the first model field of c that differs from
// DefaultConfig: WithModel conflicts with it.
func modelFieldsDefault(c Config) error {
	def := DefaultConfig()
	for _, f := range modelFields {
		if f.get(&c) != f.get(&def) {
			return configError(f.json, "conflicts with WithModel (configure the model itself)")
		}
	}
	return nil
}

// compileArms checks the A/B arms and normalises their weights.
func compileArms(arms []ArmWeight) ([]arm, error) {
	if len(arms) == 0 {
		return nil, nil
	}
	var sum float64
	seen := map[string]bool{}
	for i, a := range arms {
		if _, ok := parseArm(a.Arm); !ok {
			return nil, configError("arms", "arm %d: unknown arm %q (want %s, %s or %s)", i, a.Arm, ArmRouted, ArmDirectOnly, ArmChainAlways)
		}
		if seen[a.Arm] {
			return nil, configError("arms", "arm %q listed twice", a.Arm)
		}
		seen[a.Arm] = true
		if !finite(a.Weight) || a.Weight < 0 {
			return nil, configError("arms", "arm %q: weight must be finite and ≥ 0, got %v", a.Arm, a.Weight)
		}
		sum += a.Weight
	}
	if !(sum > 0) || math.IsInf(sum, 0) {
		return nil, configError("arms", "weights must sum to a finite value > 0, got %v", sum)
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
	return out, nil
}

// Options validates c and returns the option that sets every field of the
// router's configuration to c's (for New or Router.Reconfigure). An error
// names the JSON field and wraps ErrBadOption.
func (c Config) Options() ([]Option, error) {
	if err := c.Validate(); err != nil {
		return nil, err
	}
	c.Arms = append([]ArmWeight(nil), c.Arms...)
	return []Option{optionFunc(func(d *draft) {
		d.cfg = c
		d.cfg.Arms = append([]ArmWeight(nil), c.Arms...)
	})}, nil
}

// Validate reports the first invalid field, naming it; the error wraps
// ErrBadOption. It is the same check New and Reconfigure run on the
// options' result. O(arms).
func (c Config) Validate() error {
	_, err := draft{cfg: c}.compile()
	return err
}

// renamedFields maps the config fields that were renamed to their new names,
// so that an old file gets an error that says what to write instead.
var renamedFields = map[string]string{
	"model":    "error_model",    // the error model; "model" read as the language model
	"fallback": "unknown_entity", // what to do with unknown endpoints
}

// ParseConfig reads a Config from r over DefaultConfig; unknown fields, a
// field given twice or differing from a known one only in case (at any
// level), a value of the wrong kind or out of its type's range, trailing
// data and more than 1 MiB are errors naming the field. name labels errors
// (usually the file path).
func ParseConfig(r io.Reader, name string) (Config, error) {
	b, err := io.ReadAll(io.LimitReader(r, maxConfigBytes+1))
	if err != nil {
		return Config{}, fmt.Errorf("%s: %w", name, err)
	}
	if len(b) > maxConfigBytes {
		return Config{}, fmt.Errorf("%s: longer than %d bytes, which no config is", name, maxConfigBytes)
	}
	if err := checkConfigJSON(b); err != nil {
		return Config{}, fmt.Errorf("%s: %w", name, err)
	}
	c := DefaultConfig()
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&c); err != nil {
		if old, ok := strings.CutPrefix(err.Error(), `json: unknown field "`); ok {
			old = strings.TrimSuffix(old, `"`)
			if nw, ok := renamedFields[old]; ok {
				return Config{}, fmt.Errorf("%s: field %q was renamed to %q: %w", name, old, nw, ErrBadOption)
			}
		}
		var te *json.UnmarshalTypeError
		if errors.As(err, &te) {
			return Config{}, fmt.Errorf("%s: field %q: want %s, got JSON %s", name, te.Field, te.Type, te.Value)
		}
		return Config{}, fmt.Errorf("%s: %w", name, err)
	}
	if dec.More() {
		return Config{}, fmt.Errorf("%s: trailing data after the config object", name)
	}
	if err := c.Validate(); err != nil {
		return Config{}, fmt.Errorf("%s: %w", name, err)
	}
	return c, nil
}

// maxConfigBytes bounds a config file: the largest real one is a few
// hundred bytes.
const maxConfigBytes = 1 << 20

// LoadConfig reads and validates a Config file (see Config for the format).
func LoadConfig(path string) (Config, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return Config{}, err
	}
	return ParseConfig(bytes.NewReader(b), path)
}

// SaveConfig validates c and writes it as indented JSON to path, through a
// temporary file in the same directory and a rename.
func SaveConfig(path string, c Config) error {
	if err := c.Validate(); err != nil {
		return err
	}
	b, err := json.MarshalIndent(c, "", "  ")
	if err != nil {
		return err
	}
	b = append(b, '\n')
	return atomicfile.Write(path, ".hopwise-config-*", func(w io.Writer) error {
		_, err := w.Write(b)
		return err
	})
}
