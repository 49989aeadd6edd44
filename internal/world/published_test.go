package world

import (
	"math"
	"testing"
)

// TestAsiaMarginals checks world.Asia against the marginals of the
// chest-clinic network as usually quoted with Lauritzen & Spiegelhalter
// (1988) (P(tub) 0.0104, P(lung) 0.055, P(bronc) 0.45, P(either) 0.0648,
// P(xray) 0.11, P(dysp) 0.436; values recalled from memory, each also
// hand-checked from the tables: e.g. P(either) = 1 − (1−0.0104)(1−0.055)),
// and the explaining-away fact the routing tests rely on.
func TestAsiaMarginals(t *testing.T) {
	t.Parallel()
	w, err := Asia()
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name string
		want float64
		tol  float64
	}{
		{"asia", 0.01, 1e-12}, {"smoke", 0.5, 1e-12}, {"tub", 0.0104, 1e-12}, {"lung", 0.055, 1e-12},
		{"bronc", 0.45, 1e-12}, {"either", 1 - (1-0.0104)*(1-0.055), 1e-12}, {"xray", 0.11, 5e-4}, {"dysp", 0.436, 5e-4},
	} {
		v, ok := w.Index(c.name)
		if !ok {
			t.Fatalf("no variable %q", c.name)
		}
		p, err := w.Posterior(v, nil)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(p[1]-c.want) > c.tol {
			t.Errorf("P(%s = yes) = %.6f, want %.6f", c.name, p[1], c.want)
		}
	}
	tub, _ := w.Index("tub")
	lung, _ := w.Index("lung")
	smoke, _ := w.Index("smoke")
	either, _ := w.Index("either")
	// tub and smoke are d-separated: P(smoke | tub = yes) = P(smoke).
	p, err := w.TrueConditional(tub, 1, smoke)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(p[1]-0.5) > 1e-12 {
		t.Errorf("P(smoke | tub = yes) = %v, want 0.5", p)
	}
	// Given either = yes, tub = yes explains lung away.
	q, err := w.Posterior(lung, map[int]int{either: 1, tub: 1})
	if err != nil {
		t.Fatal(err)
	}
	r, err := w.Posterior(lung, map[int]int{either: 1})
	if err != nil {
		t.Fatal(err)
	}
	if !(q[1] < r[1]/5) {
		t.Errorf("P(lung | either, tub) = %.3f, P(lung | either) = %.3f: no explaining away", q[1], r[1])
	}
}

// TestSurvey checks world.Survey: labels in byte order, the hand-computed
// marginal P(education = high) = Σ_a,s P(a) P(s) P(high | a, s) = 0.7454
// from the typed tables, and transport with three values.
func TestSurvey(t *testing.T) {
	t.Parallel()
	w, err := Survey()
	if err != nil {
		t.Fatal(err)
	}
	e, _ := w.Index("education")
	p, err := w.Posterior(e, nil)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(p[0]-0.7454) > 1e-12 {
		t.Errorf("P(education = high) = %.6f, want 0.7454", p[0])
	}
	tr, _ := w.Index("transport")
	if w.Card(tr) != 3 {
		t.Errorf("transport has %d values, want 3", w.Card(tr))
	}
}

// TestPublishedHeldOut: ASIA has 20 non-adjacent pairs (28 pairs, 8 edges)
// and 9 at distance ≥ 3; every listed pair is at least that far apart.
func TestPublishedHeldOut(t *testing.T) {
	t.Parallel()
	w, err := Asia()
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ d, want int }{{2, 20}, {3, 9}, {6, 0}} {
		got := PublishedHeldOut(w, c.d)
		if len(got) != c.want {
			t.Errorf("distance ≥ %d: %d pairs, want %d", c.d, len(got), c.want)
		}
		for _, p := range got {
			if d := w.Distance(p[0], p[1]); d < c.d {
				t.Errorf("pair %v at distance %d < %d", p, d, c.d)
			}
		}
	}
}

// TestCancer checks world.Cancer against the marginal hand-computed from
// the typed tables, P(cancer) = 0.9·(0.3·0.03 + 0.7·0.001) + 0.1·(0.3·0.05 +
// 0.7·0.02) = 0.01163, and the independence of the common effect's causes.
func TestCancer(t *testing.T) {
	t.Parallel()
	w, err := Cancer()
	if err != nil {
		t.Fatal(err)
	}
	c, _ := w.Index("cancer")
	p, err := w.Posterior(c, nil)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(p[1]-0.01163) > 1e-12 {
		t.Errorf("P(cancer = yes) = %.6f, want 0.01163", p[1])
	}
	pol, _ := w.Index("pollution")
	smk, _ := w.Index("smoker")
	q, err := w.TrueConditional(pol, 0, smk)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(q[1]-0.3) > 1e-12 {
		t.Errorf("P(smoker | pollution = high) = %v, want 0.3", q)
	}
	if got := len(PublishedHeldOut(w, 2)); got != 6 {
		t.Errorf("%d non-adjacent pairs, want 6", got)
	}
}
