package router

import (
	"encoding/json"
	"reflect"
	"slices"
	"strings"
	"testing"
)

func TestViewJSON(t *testing.T) {
	t.Parallel()
	keys := func(t *testing.T, b []byte) map[string]any {
		t.Helper()
		var m map[string]any
		if err := json.Unmarshal(b, &m); err != nil {
			t.Fatal(err)
		}
		return m
	}
	t.Run("valued chain", func(t *testing.T) {
		t.Parallel()
		q := Query{From: "vent-north", Value: "open", To: "bed-4"}
		r, d := decideOn(t, pathGraph(7), q, WithGainThreshold(-1))
		b, err := json.Marshal(NewView(q, d, r.ErrorMeasure()))
		if err != nil {
			t.Fatal(err)
		}
		m := keys(t, b)
		for _, k := range []string{"from", "value", "to", "mode", "reason", "explanation", "bridges", "estimate", "error_measure",
			"sq_error_sum", "gain", "score", "truncated", "direct", "chain", "generation"} {
			if _, ok := m[k]; !ok {
				t.Errorf("key %q missing in %s", k, b)
			}
		}
		for _, k := range []string{"err", "min_support", "error_proxy", "key", "arm", "propensity"} {
			if _, ok := m[k]; ok {
				t.Errorf("key %q present in %s", k, b)
			}
		}
		if m["error_measure"] != string(MeasureSqErrorSum) || m["sq_error_sum"] != d.Err || m["mode"] != "chain" {
			t.Errorf("figures %v %v %v", m["error_measure"], m["sq_error_sum"], m["mode"])
		}
		ch := m["chain"].(map[string]any)
		if ch["weakest_edge_support"] != float64(d.Chain.MinSupport) || ch["sq_error_sum"] != d.Chain.Err {
			t.Errorf("chain %v", ch)
		}
		if dr := m["direct"].(map[string]any); dr["support"] != float64(d.Direct.Support) || dr["sq_error_sum"] != d.Direct.Err {
			t.Errorf("direct %v", dr)
		}
		// The estimate keeps the index's value order and round-trips.
		if !strings.Contains(string(b), `"estimate":{"dry":`) {
			t.Errorf("estimate not in value order: %s", b)
		}
		var back View
		if err := json.Unmarshal(b, &back); err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(back.Estimate.Labels, d.Values) || !slices.Equal(back.Estimate.P, d.Estimate) || back.Figure() != d.Err {
			t.Errorf("round trip: %+v", back)
		}
	})
	t.Run("presence-only", func(t *testing.T) {
		t.Parallel()
		q := Query{From: "vent-north", Value: "present", To: "bed-4"}
		r, d := decideOn(t, presenceGraph(false), q)
		b, _ := json.Marshal(NewView(q, d, r.ErrorMeasure()))
		m := keys(t, b)
		if _, ok := m["estimate"]; ok {
			t.Errorf("presence-only view carries a distribution: %s", b)
		}
		if m["error_measure"] != string(MeasureSupportProxy) || m["error_proxy"] != d.Err || m["sq_error_sum"] != nil {
			t.Errorf("presence-only figures: %s", b)
		}
		if _, ok := m["chain"].(map[string]any)["estimate"]; ok {
			t.Errorf("presence-only chain carries a distribution: %s", b)
		}
	})
	t.Run("fallback", func(t *testing.T) {
		t.Parallel()
		q := Query{From: "vent-south", Value: "open", To: "bed-tomato"}
		r, d := decideOn(t, greenhouse(1), q, WithFallback(ModeDirect))
		b, _ := json.Marshal(NewView(q, d, r.ErrorMeasure()))
		m := keys(t, b)
		for _, k := range []string{"estimate", "sq_error_sum", "error_proxy"} {
			if _, ok := m[k]; ok {
				t.Errorf("fallback view has %q: %s", k, b)
			}
		}
		if m["chain"] != nil || !reflect.DeepEqual(m["bridges"], []any{}) {
			t.Errorf("fallback chain/bridges: %s", b)
		}
	})
}

func TestDistJSON(t *testing.T) {
	t.Parallel()
	d := Dist{Labels: []string{"zeta", "alpha", "mid"}, P: []float64{0.5, 0.25, 0.25}}
	b, err := json.Marshal(d)
	if err != nil || string(b) != `{"zeta":0.5,"alpha":0.25,"mid":0.25}` {
		t.Fatalf("%s %v", b, err)
	}
	var back Dist
	if err := json.Unmarshal(b, &back); err != nil || !reflect.DeepEqual(back, d) {
		t.Fatalf("%+v %v", back, err)
	}
	for _, bad := range []string{`[1]`, `{"a":"x"}`, `{"a":1`} {
		if err := json.Unmarshal([]byte(bad), &back); err == nil {
			t.Errorf("%s: no error", bad)
		}
	}
	if _, err := json.Marshal(Dist{Labels: []string{"a"}, P: []float64{nan()}}); err == nil {
		t.Error("NaN marshalled")
	}
}

func nan() float64 { z := 0.0; return z / z }
