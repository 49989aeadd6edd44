package router

import (
	"errors"
	"strings"
	"testing"
)

// TestConfigKeysMatchExactly: a config file gives each field once and
// spelt exactly, at every level (the arms too). encoding/json matched
// "Beam" to beam and kept the last of two "gain_threshold" lines, so a
// hand-merged tuned file ran with whichever value came last, silently.
// Wrong kinds and sizes are named without Go type names.
func TestConfigKeysMatchExactly(t *testing.T) {
	t.Parallel()
	for _, c := range []struct{ json, want string }{
		{`{"gain_threshold": 0.1, "beam": 8, "gain_threshold": -0.2}`, `cfg.json: field "gain_threshold" appears twice`},
		{`{"Beam": 3}`, `cfg.json: field "Beam" differs from "beam" only in case`},
		{`{"arms": [{"arm": "routed", "weight": 1, "Weight": 0}]}`, `cfg.json: field "arms[0].Weight" differs from "weight" only in case`},
		{`{"arms": [{"arm": "routed", "weight": 1}, {"arm": "direct-only", "arm": "routed", "weight": 1}]}`, `cfg.json: field "arms[1].arm" appears twice`},
		{`{"beam": "3"}`, `cfg.json: field "beam": want a whole number, got a string`},
		{`{"max_bridges": 3.5}`, `cfg.json: field "max_bridges": want a whole number, got 3.5`},
		{`{"gain_threshold": 1e400}`, `cfg.json: field "gain_threshold": 1e400 is out of range`},
		{`{"cache_size": 99999999999999999999}`, `cfg.json: field "cache_size": 99999999999999999999 is out of range`},
		{`[1]`, `cfg.json: want a JSON object, got an array`},
		{``, `cfg.json: empty file, want a JSON object`},
		{`{"beam": 3`, `cfg.json: truncated JSON object`},
	} {
		_, err := ParseConfig(strings.NewReader(c.json), "cfg.json")
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want %q", c.json, err, c.want)
		}
	}
	// A renamed field keeps its message; valid files still parse.
	if _, err := ParseConfig(strings.NewReader(`{"model": "bayes"}`), "cfg.json"); err == nil || !strings.Contains(err.Error(), `renamed to "error_model"`) || !errors.Is(err, ErrBadOption) {
		t.Errorf("renamed field: %v", err)
	}
	c, err := ParseConfig(strings.NewReader(`{"beam": 8, "arms": [{"arm": "routed", "weight": 0.5}, {"arm": "direct-only", "weight": 0.5}], "gain_threshold": null}`), "cfg.json")
	if err != nil || c.Beam != 8 || len(c.Arms) != 2 {
		t.Errorf("valid file: %+v, %v", c, err)
	}
}
