package world

import (
	"context"
	"regexp"
	"slices"
	"testing"
)

func TestGreenhouse(t *testing.T) {
	t.Parallel()
	w, err := Greenhouse(1)
	if err != nil {
		t.Fatal(err)
	}
	wantVars := 1 + GreenhousePumps + GreenhouseZones*7 + GreenhouseZones*GreenhouseBedsPerZone*4
	if w.NumVars() != wantVars {
		t.Fatalf("%d variables, want %d", w.NumVars(), wantVars)
	}
	name := regexp.MustCompile(`^(outside/weather|pump-[1-4]|zone-[1-6]/(air-temp|thermometer|vent-a|vent-b|humidity|hygrometer|heater)|bed-([1-9]|1[0-8])/(soil-moisture|moisture-probe|leaf-wilt|yield))$`)
	for v := range w.NumVars() {
		if !name.MatchString(w.Name(v)) {
			t.Errorf("unexpected entity %q", w.Name(v))
		}
		if l := w.Labels(v); l[0] == "0" || len(l) != 2 {
			t.Errorf("%s: labels %v", w.Name(v), l)
		}
	}
	for _, want := range [][2]string{{"zone-3/vent-a", "open"}, {"bed-12/soil-moisture", "wet"}, {"pump-2", "running"}, {"bed-1/yield", "high"}} {
		v, ok := w.Index(want[0])
		if !ok || !slices.Contains(w.Labels(v), want[1]) {
			t.Errorf("missing %s=%s", want[0], want[1])
		}
	}
	if len(w.HeldOut()) != GreenhouseHeldOut {
		t.Errorf("%d held-out pairs, want %d", len(w.HeldOut()), GreenhouseHeldOut)
	}
	// Sensors read their hidden state well: the exact conditional of a
	// thermometer given its zone's air is ≥ 0.95 − jitter.
	temp, _ := w.Index("zone-4/air-temp")
	th, _ := w.Index("zone-4/thermometer")
	p, err := w.TrueConditional(temp, 1, th)
	if err != nil {
		t.Fatal(err)
	}
	if p[1] < 0.95-greenhouseJitter {
		t.Errorf("P(thermometer reads hot | hot) = %v", p[1])
	}
	// Deterministic for a seed, different across seeds.
	w2, _ := Greenhouse(1)
	w3, _ := Greenhouse(2)
	if !slices.Equal(w.CPT(50), w2.CPT(50)) || slices.Equal(w.CPT(50), w3.CPT(50)) {
		t.Error("CPTs not seed-determined")
	}

	// Locality: under local-geometric contexts, pairs seven or more hops
	// apart co-occur far less often than adjacent pairs (measured ratio ≈ 7
	// for seed 1; the check asks for 4).
	n := w.NumVars()
	co := make([]int, n*n)
	cond, _ := ConditionByName(CondLocalGeometric)
	if _, err := w.Sample(context.Background(), 5000, cond, 3, func(c Context) error {
		for i, a := range c.Vars {
			for _, b := range c.Vars[i+1:] {
				co[a*n+b]++
				co[b*n+a]++
			}
		}
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	var near, far, nearN, farN float64
	for a := range n {
		dist, _ := bfs(w.adj, a)
		for b := a + 1; b < n; b++ {
			switch {
			case dist[b] == 1:
				near += float64(co[a*n+b])
				nearN++
			case dist[b] >= 7:
				far += float64(co[a*n+b])
				farN++
			}
		}
	}
	if near/nearN < 4*far/farN {
		t.Errorf("mean support: adjacent %.1f, seven or more hops %.1f", near/nearN, far/farN)
	}
	for _, h := range w.HeldOut() {
		if co[h[0]*n+h[1]] != 0 {
			t.Errorf("held-out %s, %s co-observed", w.Name(h[0]), w.Name(h[1]))
		}
	}
}
