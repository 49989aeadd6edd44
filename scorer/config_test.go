package scorer_test

import (
	"errors"
	"math"
	"testing"

	"github.com/hopwise/hopwise/scorer"
)

// TestModelConfig: every out-of-domain field is a *FieldError naming that
// field and wrapping ErrBadOption; New builds the named model with exactly
// the configured constants; options are setters of the same fields.
func TestModelConfig(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		field string
		edit  func(*scorer.ModelConfig)
	}{
		{"Alpha", func(c *scorer.ModelConfig) { c.Bayes.Alpha = 0 }},
		{"Beta", func(c *scorer.ModelConfig) { c.Bayes.Beta = -1 }},
		{"SignalZ", func(c *scorer.ModelConfig) { c.Bayes.SignalZ = math.Inf(1) }},
		{"MissingGamma", func(c *scorer.ModelConfig) { c.Bayes.MissingGamma = -0.1 }},
		{"MissingDelta", func(c *scorer.ModelConfig) { c.Bayes.MissingDelta = 1.5 }},
		{"PriorStrength", func(c *scorer.ModelConfig) { c.Bayes.PriorStrength = 0 }},
		{"UnseenSpread", func(c *scorer.ModelConfig) { c.Bayes.UnseenSpread = math.NaN() }},
		{"Separation", func(c *scorer.ModelConfig) { c.Bayes.Separation = -2 }},
		{"NoiseK", func(c *scorer.ModelConfig) { c.Bayes.NoiseK = -1 }},
		{"Influence", func(c *scorer.ModelConfig) { c.Bayes.Influence = math.NaN() }},
		{"Influence", func(c *scorer.ModelConfig) { c.Bayes.Influence = -0.5 }},
		{"Variance", func(c *scorer.ModelConfig) { c.Bayes.Variance = 7 }},
		{"Name", func(c *scorer.ModelConfig) { c.Name = "dirichlet" }},
		{"V0", func(c *scorer.ModelConfig) { c.Name, c.Support.V0 = scorer.ModelSupport, 0 }},
		{"N0", func(c *scorer.ModelConfig) { c.Name, c.Support.N0 = scorer.ModelSupport, -3 }},
		{"Alpha", func(c *scorer.ModelConfig) { c.Name, c.Support.Alpha = scorer.ModelSupport, math.NaN() }},
	} {
		cfg := scorer.DefaultModelConfig()
		c.edit(&cfg)
		_, err := scorer.New(cfg)
		var fe *scorer.FieldError
		if !errors.As(err, &fe) || fe.Field != c.field || !errors.Is(err, scorer.ErrBadOption) {
			t.Errorf("%s: error %v, want a FieldError for %s wrapping ErrBadOption", c.field, err, c.field)
		}
	}
	// The unused model's configuration is not checked.
	cfg := scorer.DefaultModelConfig()
	cfg.Support.V0 = -1
	if _, err := scorer.New(cfg); err != nil {
		t.Errorf("bayes with a bad support config: %v", err)
	}

	want := scorer.DefaultBayesConfig()
	want.Beta, want.NoiseK, want.Influence, want.Variance = 0.01, 2, 0.5, scorer.ExactMoments
	m, err := scorer.New(scorer.ModelConfig{Bayes: want})
	if err != nil {
		t.Fatal(err)
	}
	if b, ok := m.(*scorer.Bayes); !ok || b.Config() != want {
		t.Errorf("New(bayes) = %#v, want a Bayes with %+v", m, want)
	}
	viaOpts, err := scorer.NewBayes(scorer.WithBeta(0.01), scorer.WithNoiseK(2), scorer.WithInfluence(0.5), scorer.WithVariance(scorer.ExactMoments))
	if err != nil || viaOpts.Config() != want {
		t.Errorf("NewBayes(options) config %+v (%v), want %+v", viaOpts.Config(), err, want)
	}
	sc := scorer.DefaultSupportConfig()
	sc.V0 = 3
	m, err = scorer.New(scorer.ModelConfig{Name: scorer.ModelSupport, Support: sc})
	if s, ok := m.(*scorer.Support); err != nil || !ok || s.Config() != sc {
		t.Errorf("New(support) = %#v (%v), want a Support with %+v", m, err, sc)
	}
	// An option for the other model is refused by Apply.
	if _, err := scorer.DefaultSupportConfig().Apply(scorer.WithNoiseK(1)); !errors.Is(err, scorer.ErrBadOption) {
		t.Errorf("SupportConfig.Apply(WithNoiseK): %v, want ErrBadOption", err)
	}
	if _, err := scorer.DefaultBayesConfig().Apply(scorer.WithV0(1)); !errors.Is(err, scorer.ErrBadOption) {
		t.Errorf("BayesConfig.Apply(WithV0): %v, want ErrBadOption", err)
	}
}
