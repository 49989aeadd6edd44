package scorer

import (
	"fmt"
	"math"
)

// BayesConfig holds every constant of the Bayes model. DefaultBayesConfig
// fills the defaults; the functional options (WithAlpha, WithBeta, ...) are
// setters of these fields, and Validate is the one place their domains are
// checked. The zero value is not valid (α must be > 0): start from
// DefaultBayesConfig.
type BayesConfig struct {
	// Alpha is the Dirichlet pseudo-count α (finite, > 0).
	Alpha float64
	// HopAlpha is the Dirichlet pseudo-count of the rows of a chain's hop
	// tables (finite, > 0; see Bayes, "Hop prior").
	HopAlpha float64
	// Beta is the per-hop squared bias β (finite, ≥ 0).
	Beta float64
	// SignalZ is z of EdgeCost and of the signal bound (finite, ≥ 0).
	SignalZ float64
	// MissingGamma and MissingDelta are γ (finite, ≥ 0) and δ (in [0, 1])
	// of the missing-signal bias γ·(δ − L)₊².
	MissingGamma, MissingDelta float64
	// PriorStrength is A of the empirical-Bayes direct prior (finite, > 0).
	PriorStrength float64
	// UnseenSpread is η of the unobserved-pair error (finite, ≥ 0).
	UnseenSpread float64
	// Separation is λ of the separation bias (finite, ≥ 0; 0 = off).
	Separation float64
	// NoiseK is k of the gain margin (finite, ≥ 0; 0 = off).
	NoiseK float64
	// Influence is κ of the influence bound on an unobserved pair's error
	// (finite, ≥ 0; 0 = off).
	Influence float64
	// Variance is the chain-variance method (DeltaMethod or ExactMoments).
	Variance Variance
}

// DefaultBayesConfig returns the fitted defaults (DefaultAlpha,
// DefaultHopAlpha, DefaultBeta,
// DefaultSignalZ, DefaultMissingGamma, DefaultMissingDelta,
// DefaultPriorStrength, DefaultUnseenSpread, DefaultSeparation,
// DefaultNoiseK, DefaultInfluence, DeltaMethod).
func DefaultBayesConfig() BayesConfig {
	return BayesConfig{Alpha: DefaultAlpha, HopAlpha: DefaultHopAlpha, Beta: DefaultBeta, SignalZ: DefaultSignalZ,
		MissingGamma: DefaultMissingGamma, MissingDelta: DefaultMissingDelta,
		PriorStrength: DefaultPriorStrength, UnseenSpread: DefaultUnseenSpread,
		Separation: DefaultSeparation, NoiseK: DefaultNoiseK, Influence: DefaultInfluence, Variance: DeltaMethod}
}

// SupportConfig holds the constants of the presence-only Support model.
// Start from DefaultSupportConfig; Validate checks the domains.
type SupportConfig struct {
	// Alpha smooths the reported Dist (finite, > 0).
	Alpha float64
	// Beta is the per-hop squared bias β (finite, ≥ 0).
	Beta float64
	// V0 is the error numerator v0 (finite, > 0).
	V0 float64
	// N0 is the pseudo-support n0 (finite, > 0).
	N0 float64
}

// DefaultSupportConfig returns DefaultAlpha, DefaultSupportBeta, DefaultV0
// and DefaultN0.
func DefaultSupportConfig() SupportConfig {
	return SupportConfig{Alpha: DefaultAlpha, Beta: DefaultSupportBeta, V0: DefaultV0, N0: DefaultN0}
}

// Model names accepted by ModelConfig.Name.
const (
	// ModelBayes names the valued Dirichlet model (Bayes).
	ModelBayes = "bayes"
	// ModelSupport names the presence-only model (Support).
	ModelSupport = "support"
)

// ModelConfig is a small serialisable description of a model: its Name
// (ModelBayes or ModelSupport; "" means ModelBayes) and the configuration
// of each model; only the named model's configuration is used. New builds
// the model.
type ModelConfig struct {
	Name    string
	Bayes   BayesConfig
	Support SupportConfig
}

// DefaultModelConfig returns the Bayes model with both configurations at
// their defaults.
func DefaultModelConfig() ModelConfig {
	return ModelConfig{Name: ModelBayes, Bayes: DefaultBayesConfig(), Support: DefaultSupportConfig()}
}

// FieldError reports the configuration field whose value is outside its
// domain. It wraps ErrBadOption.
type FieldError struct {
	// Field is the Go field name in BayesConfig, SupportConfig or
	// ModelConfig ("Alpha", "MissingDelta", "V0", "Name", ...).
	Field string
	// Msg states the domain and the value.
	Msg string
}

func (e *FieldError) Error() string { return fmt.Sprintf("%v: %s: %s", ErrBadOption, e.Field, e.Msg) }

// Unwrap returns ErrBadOption.
func (e *FieldError) Unwrap() error { return ErrBadOption }

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// check is one domain rule: the field, its value, and whether it is in.
type check struct {
	field string
	v     float64
	ok    bool
	want  string
}

func firstBad(cs []check) error {
	for _, c := range cs {
		if !finite(c.v) || !c.ok {
			return &FieldError{Field: c.field, Msg: fmt.Sprintf("%s, got %v", c.want, c.v)}
		}
	}
	return nil
}

// Validate reports the first field outside its domain as a *FieldError
// (wrapping ErrBadOption). O(1).
func (c BayesConfig) Validate() error {
	if err := firstBad([]check{
		{"Alpha", c.Alpha, c.Alpha > 0, "α must be finite and > 0"},
		{"HopAlpha", c.HopAlpha, c.HopAlpha > 0, "the hop pseudo-count must be finite and > 0"},
		{"Beta", c.Beta, c.Beta >= 0, "β must be finite and ≥ 0"},
		{"SignalZ", c.SignalZ, c.SignalZ >= 0, "z must be finite and ≥ 0"},
		{"MissingGamma", c.MissingGamma, c.MissingGamma >= 0, "γ must be finite and ≥ 0"},
		{"MissingDelta", c.MissingDelta, c.MissingDelta >= 0 && c.MissingDelta <= 1, "δ must be in [0, 1]"},
		{"PriorStrength", c.PriorStrength, c.PriorStrength > 0, "A must be finite and > 0"},
		{"UnseenSpread", c.UnseenSpread, c.UnseenSpread >= 0, "η must be finite and ≥ 0"},
		{"Separation", c.Separation, c.Separation >= 0, "λ must be finite and ≥ 0"},
		{"NoiseK", c.NoiseK, c.NoiseK >= 0, "k must be finite and ≥ 0"},
		{"Influence", c.Influence, c.Influence >= 0, "κ must be finite and ≥ 0"},
	}); err != nil {
		return err
	}
	if c.Variance != DeltaMethod && c.Variance != ExactMoments {
		return &FieldError{Field: "Variance", Msg: fmt.Sprintf("unknown method %d", int(c.Variance))}
	}
	return nil
}

// Validate reports the first field outside its domain as a *FieldError
// (wrapping ErrBadOption). O(1).
func (c SupportConfig) Validate() error {
	return firstBad([]check{
		{"Alpha", c.Alpha, c.Alpha > 0, "α must be finite and > 0"},
		{"Beta", c.Beta, c.Beta >= 0, "β must be finite and ≥ 0"},
		{"V0", c.V0, c.V0 > 0, "v0 must be finite and > 0"},
		{"N0", c.N0, c.N0 > 0, "n0 must be finite and > 0"},
	})
}

// Validate checks the name and the named model's configuration. O(1).
func (c ModelConfig) Validate() error {
	switch c.Name {
	case "", ModelBayes:
		return c.Bayes.Validate()
	case ModelSupport:
		return c.Support.Validate()
	}
	return &FieldError{Field: "Name", Msg: fmt.Sprintf("unknown model %q (want %s or %s)", c.Name, ModelBayes, ModelSupport)}
}

// New validates c and builds the named model. O(1).
func New(c ModelConfig) (Model, error) {
	if err := c.Validate(); err != nil {
		return nil, err
	}
	if c.Name == ModelSupport {
		return NewSupportFrom(c.Support)
	}
	return NewBayesFrom(c.Bayes)
}

// NewBayesFrom validates c and returns the Bayes model it describes. O(1).
func NewBayesFrom(c BayesConfig) (*Bayes, error) {
	if err := c.Validate(); err != nil {
		return nil, err
	}
	return &Bayes{alpha: c.Alpha, hopAlpha: c.HopAlpha, beta: c.Beta, signalZ: c.SignalZ, gamma: c.MissingGamma, delta: c.MissingDelta,
		prior: c.PriorStrength, separation: c.Separation, noiseK: c.NoiseK, spread: c.UnseenSpread, influence: c.Influence, variance: c.Variance}, nil
}

// NewSupportFrom validates c and returns the Support model it describes.
// O(1).
func NewSupportFrom(c SupportConfig) (*Support, error) {
	if err := c.Validate(); err != nil {
		return nil, err
	}
	return &Support{alpha: c.Alpha, beta: c.Beta, v0: c.V0, n0: c.N0}, nil
}

// Config returns the configuration m was built from (NewBayesFrom of it
// builds an equal model). O(1).
func (b *Bayes) Config() BayesConfig {
	return BayesConfig{Alpha: b.alpha, HopAlpha: b.hopAlpha, Beta: b.beta, SignalZ: b.signalZ, MissingGamma: b.gamma, MissingDelta: b.delta,
		PriorStrength: b.prior, UnseenSpread: b.spread, Separation: b.separation, NoiseK: b.noiseK, Influence: b.influence, Variance: b.variance}
}

// Config returns the configuration m was built from. O(1).
func (m *Support) Config() SupportConfig {
	return SupportConfig{Alpha: m.alpha, Beta: m.beta, V0: m.v0, N0: m.n0}
}

// errNotFor is returned by an option applied to a model it does not
// configure.
func errNotFor(option, model string) error {
	return fmt.Errorf("%w: %s does not apply to the %s model", ErrBadOption, option, model)
}
