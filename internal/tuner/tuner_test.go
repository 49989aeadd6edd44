package tuner

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/internal/abstat"
	"github.com/hopwise/hopwise/internal/ope"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
)

// TestEncodeConfig: τ, H and ε are always written, every other field only
// when it differs from the router defaults, and the file reads back into
// the same configuration.
func TestEncodeConfig(t *testing.T) {
	t.Parallel()
	def := router.DefaultConfig()
	full := def
	full.GainThreshold, full.MaxBridges, full.Exploration, full.ExplorationSalt = 0.0125, 2, 0.1, "vents"
	full.Arms = []router.ArmWeight{{Arm: router.ArmRouted, Weight: 0.9}, {Arm: router.ArmDirectOnly, Weight: 0.1}}
	full.HashKey = "00112233445566778899aabbccddeeff"
	support := def
	support.Model, support.Beta, support.SupportV0 = "support", 0.004, 0.3
	bayes := def
	bayes.NoiseK, bayes.PriorStrength = 2, 4.5
	for _, c := range []struct {
		name string
		cfg  router.Config
		keys []string
	}{
		{"defaults", def, []string{"gain_threshold", "max_bridges", "exploration"}},
		{"deployed", full, []string{"gain_threshold", "max_bridges", "exploration", "exploration_salt", "arms", "hash_key"}},
		{"fitted support model", support, []string{"gain_threshold", "max_bridges", "error_model", "beta", "support_v0", "exploration"}},
		{"refitted Bayes constants", bayes, []string{"gain_threshold", "max_bridges", "noise_k", "prior_strength", "exploration"}},
	} {
		b, err := EncodeConfig(c.cfg)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		var m map[string]json.RawMessage
		if err := json.Unmarshal(b, &m); err != nil {
			t.Fatalf("%s: %v\n%s", c.name, err, b)
		}
		var keys []string
		for k := range m {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		want := slices.Sorted(slices.Values(c.keys))
		if !slices.Equal(keys, want) {
			t.Errorf("%s: keys %v, want %v\n%s", c.name, keys, want, b)
		}
		back, err := router.ParseConfig(bytes.NewReader(b), c.name)
		if err != nil || fmt.Sprint(back) != fmt.Sprint(c.cfg) {
			t.Errorf("%s: reads back as %+v (%v)", c.name, back, err)
		}
	}
	bad := def
	bad.Exploration = 0.9
	if _, err := EncodeConfig(bad); err == nil {
		t.Error("an invalid config was encoded")
	}
}

func TestFormatTaus(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		in   []float64
		want []string
	}{
		{[]float64{0, 0.16061, 0.16064}, []string{"0", "0.16061", "0.16064"}},
		{[]float64{0.5, 0.25}, []string{"0.5", "0.25"}},
		{[]float64{0.123456789, 0.123456781, 0.123456789}, []string{"0.12345679", "0.12345678", "0.12345679"}},
		{[]float64{-0.0017744, 0.1}, []string{"-0.001774", "0.1"}},
	} {
		if got := FormatTaus(c.in); !slices.Equal(got, c.want) {
			t.Errorf("%v → %v, want %v", c.in, got, c.want)
		}
	}
}

// TestLoggedSettings: ε from the propensities of routed decisions, arms
// as unit shares, nothing when the logs carry neither.
func TestLoggedSettings(t *testing.T) {
	t.Parallel()
	var ds []otelx.DecisionRecord
	for i := range 100 {
		arm, p, reason := router.ArmRouted, 0.85, router.ReasonGainAbove
		switch {
		case i%4 == 0:
			arm, p, reason = router.ArmDirectOnly, 1, router.ReasonArmDirectOnly
		case i%10 == 1:
			p, reason = 0.15, router.ReasonExplore
		}
		ds = append(ds, otelx.DecisionRecord{Key: fmt.Sprintf("pump-%d", i), Arm: arm, Propensity: p, Reason: reason})
	}
	eps, note := loggedExploration(ds, router.ArmRouted)
	if math.Abs(eps-0.15) > 1e-12 || note != "" {
		t.Errorf("ε = %v (%q), want 0.15", eps, note)
	}
	arms := loggedArms(ds)
	if want := []router.ArmWeight{{Arm: router.ArmRouted, Weight: 0.75}, {Arm: router.ArmDirectOnly, Weight: 0.25}}; !slices.Equal(arms, want) {
		t.Errorf("arms %v, want %v", arms, want)
	}
	plain := []otelx.DecisionRecord{{Key: "a", Propensity: math.NaN(), Reason: router.ReasonGainBelow}}
	if eps, _ := loggedExploration(plain, router.ArmRouted); eps != -1 {
		t.Errorf("ε without propensities: %v", eps)
	}
	if arms := loggedArms(plain); arms != nil {
		t.Errorf("arms without arms: %v", arms)
	}
	// An unknown arm name cannot be deployed: the arms are left out, and
	// a note says so.
	odd := append(slices.Clone(ds), otelx.DecisionRecord{Key: "fan-1", Arm: "blue"})
	if c, notes := current(odd, DefaultOptions()); c.Arms != nil || !strings.Contains(strings.Join(notes, "\n"), "do not form a valid router config") || c.Exploration != 0.15 {
		t.Errorf("unknown arm: config %+v, notes %q", c, notes)
	}
	ds[2].Propensity = 0.7 // a second rate
	if eps, note := loggedExploration(ds, router.ArmRouted); eps != 0.15 || !strings.Contains(note, "2 exploration rates") {
		t.Errorf("two rates: ε = %v, note %q", eps, note)
	}
}

// TestDecide: the change/keep rule on hand-made results.
func TestDecide(t *testing.T) {
	t.Parallel()
	row := func(tau float64, h int, value, lo, hi float64, supported bool) Policy {
		p := Policy{PolicyResult: ope.PolicyResult{Tau: tau, MaxHops: h, Supported: supported}}
		p.DR.Value = abstat.Interval{Est: value, Lo: value - 0.01, Hi: value + 0.01}
		if supported {
			p.Versus = &ope.Versus{Tau: 0, MaxHops: 3, DR: abstat.Interval{Est: value - 0.8, Lo: lo, Hi: hi}}
		}
		p.Current = tau == 0 && h == 3
		return p
	}
	for _, c := range []struct {
		name     string
		policies []Policy
		want     Decision
		tau      float64
		why      string
	}{
		{"clear gain", []Policy{row(0, 3, 0.8, 0, 0, true), row(0.1, 3, 0.85, 0.02, 0.08, true)}, Change, 0.1, "excludes zero"},
		{"gain within noise", []Policy{row(0, 3, 0.8, 0, 0, true), row(0.1, 3, 0.81, -0.01, 0.03, true)}, Keep, 0, "includes zero"},
		{"current is best", []Policy{row(0, 3, 0.8, 0, 0, true), row(0.1, 3, 0.8, -0.01, 0.01, true)}, Keep, 0, "highest DR value"},
		{"current unsupported", []Policy{row(0, 3, 0, 0, 0, false), row(0.1, 3, 0.9, 0, 0, true)}, Keep, 0, "has no estimate"},
		{"nothing supported", []Policy{row(0, 3, 0, 0, 0, false)}, None, 0, "no candidate"},
	} {
		rep := &Report{Estimator: "dr", Confidence: 0.95, Policies: c.policies}
		rep.decide(router.DefaultConfig())
		if rep.Decision != c.want || !strings.Contains(rep.Why, c.why) {
			t.Errorf("%s: %s (%s), want %s (%q)", c.name, rep.Decision, rep.Why, c.want, c.why)
		}
		if c.want != None && (rep.Config == nil || rep.Config.GainThreshold != c.tau) {
			t.Errorf("%s: config %+v, want τ %v", c.name, rep.Config, c.tau)
		}
	}
}

func ExampleFormatTaus() {
	fmt.Println(FormatTaus([]float64{0, 0.160612, 0.160641, 0.25}))
	// Output: [0 0.16061 0.16064 0.25]
}
