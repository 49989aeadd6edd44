package router

import (
	"bytes"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"github.com/hopwise/hopwise/scorer"
)

// Config is the file form of the router's options, read by LoadConfig,
// written by SaveConfig (and by `hopwise tune`). Format: one JSON object;
// every field is optional and defaults to DefaultConfig; unknown fields are
// rejected. Example:
//
//	{
//	  "gain_threshold": 0.002,      // τ_gain, finite
//	  "max_bridges": 3,             // H in [0, 3]
//	  "beam": 64,                   // B in [1, 2^20]
//	  "fan_out": 16,                // f in [1, 2^20]; 0 or absent = DefaultFanOut
//	  "max_candidates": 4,          // k in [1, 2^16]
//	  "error_model": "bayes",       // "bayes" or "support"
//	  "alpha": 1,                   // Dirichlet α > 0 (bayes; smoothing for support)
//	  "beta": 0.001,                // per-hop squared bias β ≥ 0
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
//	  "hash_key": ""                // 32 hex digits (16-byte SipHash key), "" = DefaultHashKey
//	}
//
// (JSON has no comments; they are annotations here.) "error_model" and
// "unknown_entity" were called "model" and "fallback" before; a file that
// still uses an old name is rejected with an error naming the new field. The
// "beta" field is
// the β of whichever model is chosen; its default is the Bayes model's
// scorer.DefaultBeta, so a "support" configuration should set it (the
// support model's own fit is scorer.DefaultSupportBeta).
type Config struct {
	GainThreshold   float64     `json:"gain_threshold"`
	MaxBridges      int         `json:"max_bridges"`
	Beam            int         `json:"beam"`
	FanOut          int         `json:"fan_out,omitempty"`
	MaxCandidates   int         `json:"max_candidates"`
	Model           string      `json:"error_model"`
	Alpha           float64     `json:"alpha"`
	Beta            float64     `json:"beta"`
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
}

// DefaultConfig returns the configuration New uses without options.
func DefaultConfig() Config {
	return Config{
		GainThreshold:   DefaultGainThreshold,
		MaxBridges:      DefaultMaxBridges,
		Beam:            DefaultBeam,
		FanOut:          DefaultFanOut,
		MaxCandidates:   DefaultMaxCandidates,
		Model:           "bayes",
		Alpha:           scorer.DefaultAlpha,
		Beta:            scorer.DefaultBeta,
		Fallback:        "error",
		CacheSize:       DefaultCacheSize,
		ExpansionBudget: DefaultExpansionBudget,
	}
}

// fieldError names the JSON field of a bad value.
func fieldError(field string, err error) error {
	return fmt.Errorf("field %q: %w", field, err)
}

// Options converts the configuration into router options, validating every
// field; an error names the JSON field and wraps ErrBadOption.
func (c Config) Options() ([]Option, error) {
	type fo struct {
		field string
		opt   Option
	}
	var list []fo
	add := func(field string, o Option) { list = append(list, fo{field, o}) }
	add("gain_threshold", WithGainThreshold(c.GainThreshold))
	add("max_bridges", WithMaxBridges(c.MaxBridges))
	add("beam", WithBeam(c.Beam))
	if c.FanOut != 0 {
		add("fan_out", WithFanOut(c.FanOut))
	}
	add("max_candidates", WithMaxCandidates(c.MaxCandidates))
	add("cache_size", WithCacheSize(c.CacheSize))
	add("expansion_budget", WithExpansionBudget(c.ExpansionBudget))
	add("exploration", WithExploration(c.Exploration, c.ExplorationSalt))
	fb, err := ParseFallback(c.Fallback)
	if err != nil {
		return nil, fieldError("unknown_entity", err)
	}
	switch fb {
	case FallbackDirect:
		add("unknown_entity", WithFallback(ModeDirect))
	case FallbackChain:
		add("unknown_entity", WithFallback(ModeChain))
	default:
		add("unknown_entity", WithoutFallback())
	}
	if c.UtilityLambda != 0 || c.HopCost != 0 {
		if c.UtilityLambda == 0 {
			return nil, fieldError("hop_cost", fmt.Errorf("%w: hop_cost needs utility_lambda > 0", ErrBadOption))
		}
		add("utility_lambda", WithUtility(c.UtilityLambda, c.HopCost))
	}
	if len(c.Arms) > 0 {
		add("arms", WithArms(c.Arms...))
	}
	if c.HashKey != "" {
		key, err := hex.DecodeString(c.HashKey)
		if err != nil || len(key) != 16 {
			return nil, fieldError("hash_key", fmt.Errorf("%w: want 32 hex digits", ErrBadOption))
		}
		add("hash_key", WithHashKey(key))
	}
	switch c.Model {
	case "", "bayes":
		if c.SupportV0 != 0 || c.SupportN0 != 0 {
			return nil, fieldError("support_v0", fmt.Errorf("%w: support_v0/support_n0 need error_model \"support\"", ErrBadOption))
		}
		add("alpha", WithAlpha(c.Alpha))
		add("beta", WithBeta(c.Beta))
	case "support":
		opts := []scorer.Option{scorer.WithAlpha(c.Alpha), scorer.WithBeta(c.Beta)}
		if c.SupportV0 != 0 {
			opts = append(opts, scorer.WithV0(c.SupportV0))
		}
		if c.SupportN0 != 0 {
			opts = append(opts, scorer.WithN0(c.SupportN0))
		}
		m, err := scorer.NewSupport(opts...)
		if err != nil {
			return nil, fieldError("error_model", fmt.Errorf("%w: %v", ErrBadOption, err))
		}
		add("error_model", WithModel(m))
	default:
		return nil, fieldError("error_model", fmt.Errorf("%w: unknown model %q (want bayes or support)", ErrBadOption, c.Model))
	}
	// Validate each option on its own so the error names its field.
	out := make([]Option, 0, len(list))
	for _, o := range list {
		s := defaultSettings()
		if err := o.opt.apply(&s); err != nil {
			return nil, fieldError(o.field, err)
		}
		out = append(out, o.opt)
	}
	return out, nil
}

// Validate reports the first invalid field.
func (c Config) Validate() error {
	_, err := c.Options()
	return err
}

// renamedFields maps the config fields that were renamed to their new names,
// so that an old file gets an error that says what to write instead.
var renamedFields = map[string]string{
	"model":    "error_model",    // the error model; "model" read as the language model
	"fallback": "unknown_entity", // what to do with unknown endpoints
}

// ParseConfig reads a Config from r over DefaultConfig; unknown fields and
// trailing data are errors. name labels errors (usually the file path).
func ParseConfig(r io.Reader, name string) (Config, error) {
	c := DefaultConfig()
	dec := json.NewDecoder(r)
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
	f, err := os.CreateTemp(filepath.Dir(path), ".hopwise-config-*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	if _, err := f.Write(b); err != nil {
		f.Close()
		os.Remove(tmp)
		return err
	}
	if err := f.Sync(); err != nil {
		f.Close()
		os.Remove(tmp)
		return err
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return err
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return err
	}
	return nil
}
