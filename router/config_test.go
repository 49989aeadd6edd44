package router

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/scorer"
)

func TestConfigRoundTrip(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	path := filepath.Join(dir, "route.json")
	c := DefaultConfig()
	c.GainThreshold = 0.004
	c.MaxBridges = 2
	c.Fallback = "direct"
	c.UtilityLambda, c.HopCost = 2, 0.001
	c.Exploration, c.ExplorationSalt = 0.1, "spring"
	c.Arms = []ArmWeight{{ArmRouted, 0.9}, {ArmDirectOnly, 0.1}}
	c.HashKey = "000102030405060708090a0b0c0d0e0f"
	if err := SaveConfig(path, c); err != nil {
		t.Fatal(err)
	}
	got, err := LoadConfig(path)
	if err != nil {
		t.Fatal(err)
	}
	if got.GainThreshold != 0.004 || got.MaxBridges != 2 || got.Fallback != "direct" || len(got.Arms) != 2 ||
		got.HashKey != c.HashKey || got.Beam != DefaultBeam || got.Exploration != 0.1 {
		t.Fatalf("round trip: %+v", got)
	}
	opts, err := got.Options()
	if err != nil {
		t.Fatal(err)
	}
	r, err := New(greenhouse(1), opts...)
	if err != nil {
		t.Fatal(err)
	}
	st := r.cfg.Load()
	if st.tau != 0.004 || st.maxBridges != 2 || st.fallback != FallbackDirect || !st.utility || st.lambda != 2 || len(st.arms) != 2 {
		t.Fatalf("settings %+v", st)
	}
	// Missing fields keep their defaults.
	c2, err := ParseConfig(strings.NewReader(`{"beam": 8}`), "inline")
	if err != nil || c2.Beam != 8 || c2.MaxBridges != DefaultMaxBridges || c2.CacheSize != DefaultCacheSize {
		t.Fatalf("partial config: %+v %v", c2, err)
	}
}

func TestConfigErrorsNameTheField(t *testing.T) {
	t.Parallel()
	cases := []struct{ json, field string }{
		{`{"beam": 0}`, "beam"},
		{`{"max_bridges": 5}`, "max_bridges"},
		{`{"unknown_entity": "maybe"}`, "unknown_entity"},
		{`{"hop_cost": 0.1}`, "hop_cost"},
		{`{"exploration": 0.9}`, "exploration"},
		{`{"arms": [{"arm": "sideways", "weight": 1}]}`, "arms"},
		{`{"hash_key": "zz"}`, "hash_key"},
		{`{"error_model": "oracle"}`, "error_model"},
		// Renamed fields are refused, naming the new field.
		{`{"model": "bayes"}`, `renamed to "error_model"`},
		{`{"fallback": "direct"}`, `renamed to "unknown_entity"`},
		{`{"alpha": -1}`, "alpha"},
		{`{"beam": "wide"}`, "beam"},
		{`{"beam_width": 8}`, "beam_width"}, // unknown field
		{`{"cache_size": -3}`, "cache_size"},
	}
	for _, c := range cases {
		_, err := ParseConfig(strings.NewReader(c.json), "cfg.json")
		if err == nil {
			t.Errorf("%s: no error", c.json)
			continue
		}
		if !strings.Contains(err.Error(), c.field) || !strings.Contains(err.Error(), "cfg.json") {
			t.Errorf("%s: error %q does not name field %q and the file", c.json, err, c.field)
		}
	}
	if _, err := ParseConfig(strings.NewReader(`{"beam": 0}`), "x"); !errors.Is(err, ErrBadOption) {
		t.Errorf("validation error does not wrap ErrBadOption: %v", err)
	}
	if _, err := ParseConfig(strings.NewReader(`{} {}`), "x"); err == nil {
		t.Error("trailing data accepted")
	}
	if _, err := LoadConfig(filepath.Join(t.TempDir(), "missing.json")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: %v", err)
	}
	// The support model is selectable.
	c, err := ParseConfig(strings.NewReader(`{"error_model": "support", "support_n0": 2}`), "x")
	if err != nil {
		t.Fatal(err)
	}
	opts, _ := c.Options()
	r, err := New(greenhouse(1), opts...)
	if err != nil || r.cfg.Load().model.Name() != "support" || !r.cfg.Load().forced {
		t.Fatalf("support model: %v", err)
	}
}

// TestConfigModelFields: the Bayes constants of the file round-trip through
// SaveConfig/LoadConfig, build exactly the model scorer.NewBayes builds from
// the same options, are refused out of their domain or under the support
// model (naming the field), and WithModel conflicts with any of them.
func TestConfigModelFields(t *testing.T) {
	t.Parallel()
	c := DefaultConfig()
	c.SignalZ, c.MissingGamma, c.MissingDelta = 0.5, 2, 0.2
	c.PriorStrength, c.UnseenSpread, c.Separation, c.NoiseK = 5, 0.3, 0.5, 2
	c.ChainVariance, c.HopAlpha = "exact", 0.75
	path := filepath.Join(t.TempDir(), "model.json")
	if err := SaveConfig(path, c); err != nil {
		t.Fatal(err)
	}
	got, err := LoadConfig(path)
	if err != nil || fmt.Sprint(got) != fmt.Sprint(c) {
		t.Fatalf("round trip: %+v (%v), want %+v", got, err, c)
	}
	opts, err := got.Options()
	if err != nil {
		t.Fatal(err)
	}
	r, err := New(greenhouse(1), opts...)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	want, err := scorer.NewBayes(scorer.WithSignalZ(0.5), scorer.WithMissingSignal(2, 0.2), scorer.WithPriorStrength(5),
		scorer.WithUnseenSpread(0.3), scorer.WithSeparation(0.5), scorer.WithNoiseK(2), scorer.WithVariance(scorer.ExactMoments), scorer.WithHopAlpha(0.75))
	if err != nil {
		t.Fatal(err)
	}
	if b, ok := r.cfg.Load().model.(*scorer.Bayes); !ok || b.Config() != want.Config() {
		t.Errorf("router model %#v, want Bayes %+v", r.cfg.Load().model, want.Config())
	}

	for _, tc := range []struct{ json, field string }{
		{`{"signal_z": -1}`, `"signal_z"`},
		{`{"missing_gamma": -0.5}`, `"missing_gamma"`},
		{`{"missing_delta": 2}`, `"missing_delta"`},
		{`{"prior_strength": 0}`, `"prior_strength"`},
		{`{"hop_alpha": 0}`, `"hop_alpha"`},
		{`{"hop_alpha": -1}`, `"hop_alpha"`},
		{`{"unseen_spread": -1}`, `"unseen_spread"`},
		{`{"separation": -1}`, `"separation"`},
		{`{"noise_k": -0.1}`, `"noise_k"`},
		{`{"chain_variance": "second-order"}`, `"chain_variance"`},
		{`{"error_model": "support", "noise_k": 2}`, `"noise_k"`},
		{`{"error_model": "support", "chain_variance": "exact"}`, `"chain_variance"`},
		{`{"error_model": "support", "support_v0": -1}`, `"support_v0"`},
		{`{"support_n0": 3}`, `"support_v0"`},
	} {
		_, err := ParseConfig(strings.NewReader(tc.json), "m.json")
		if !errors.Is(err, ErrBadOption) || !strings.Contains(err.Error(), tc.field) || !strings.Contains(err.Error(), "m.json") {
			t.Errorf("%s: error %v, want ErrBadOption naming %s and the file", tc.json, err, tc.field)
		}
	}
	if _, err := New(greenhouse(1), WithModel(want), opts[0]); !errors.Is(err, ErrBadOption) || !strings.Contains(err.Error(), "WithModel") {
		t.Errorf("WithModel with a configured noise_k: %v, want a conflict", err)
	}
}

// TestOptionErrorsNameFieldAndOption: an option's bad value is reported by
// the one validation, naming the JSON field and the option.
func TestOptionErrorsNameFieldAndOption(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		opt   Option
		field string
	}{
		{WithBeam(0), `field "beam" (WithBeam)`},
		{WithFanOut(-1), `field "fan_out" (WithFanOut)`},
		{WithMaxBridges(4), `field "max_bridges" (WithMaxBridges)`},
		{WithGainThreshold(math.NaN()), `field "gain_threshold" (WithGainThreshold)`},
		{WithAlpha(0), `field "alpha" (WithAlpha)`},
		{WithBeta(-1), `field "beta" (WithBeta)`},
		{WithFallback(Mode(9)), `field "unknown_entity" (WithFallback)`},
		{WithCacheSize(-1), `field "cache_size" (WithCacheSize)`},
		{WithUtility(-1, 0), `field "utility_lambda" (WithUtility)`},
		{WithUtility(0, 0.5), `field "hop_cost" (WithUtility)`},
		{WithExpansionBudget(0), `field "expansion_budget" (WithExpansionBudget)`},
		{WithExploration(0.6, ""), `field "exploration" (WithExploration)`},
		{WithArms(ArmWeight{ArmRouted, -1}), `field "arms" (WithArms)`},
		{WithHashKey([]byte("short")), `field "hash_key" (WithHashKey)`},
		{WithModel(nil), "WithModel"},
	} {
		_, err := New(greenhouse(1), tc.opt)
		if !errors.Is(err, ErrBadOption) || !strings.Contains(err.Error(), tc.field) {
			t.Errorf("error %v, want ErrBadOption naming %s", err, tc.field)
		}
	}
}
