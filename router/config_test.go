package router

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
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
