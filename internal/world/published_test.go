package world

import (
	"context"
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

// TestStudent checks world.Student against the posteriors Koller &
// Friedman (2009) quote for the student network in §3.2.1 ("reasoning
// patterns"), printed to two or three digits; both the tables and these
// values were typed from memory, and their agreement to every printed digit
// is the check that the tables were remembered right.
func TestStudent(t *testing.T) {
	t.Parallel()
	w, err := Student()
	if err != nil {
		t.Fatal(err)
	}
	const d, i, g, s, l = 0, 1, 2, 3, 4
	g2, g3 := 1, 2
	for _, c := range []struct {
		what      string
		query, to int // P(query = to | evidence)
		ev        map[int]int
		want, tol float64
	}{
		{"P(l1)", l, 1, nil, 0.502, 5e-4},
		{"P(l1 | i0)", l, 1, map[int]int{i: 0}, 0.389, 5e-4},
		{"P(l1 | i0, d0)", l, 1, map[int]int{i: 0, d: 0}, 0.513, 5e-4},
		{"P(i1 | g3)", i, 1, map[int]int{g: g3}, 0.079, 5e-4},
		{"P(d1 | g3)", d, 1, map[int]int{g: g3}, 0.629, 5e-4},
		{"P(i1 | l0)", i, 1, map[int]int{l: 0}, 0.14, 5e-3},
		{"P(i1 | g3, d1)", i, 1, map[int]int{g: g3, d: 1}, 0.11, 5e-3},
		{"P(i1 | g3, s1)", i, 1, map[int]int{g: g3, s: 1}, 0.578, 5e-4},
		{"P(d1 | g3, s1)", d, 1, map[int]int{g: g3, s: 1}, 0.76, 5e-3},
		{"P(i1 | g2)", i, 1, map[int]int{g: g2}, 0.175, 5e-4},
		{"P(i1 | g2, d1)", i, 1, map[int]int{g: g2, d: 1}, 0.34, 5e-3},
	} {
		p, err := w.Posterior(c.query, c.ev)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(p[c.to]-c.want) > c.tol {
			t.Errorf("%s = %.4f, want %.3g", c.what, p[c.to], c.want)
		}
	}
	if w.Card(g) != 3 {
		t.Errorf("Grade has %d values, want 3", w.Card(g))
	}
}

// TestSprinklerDeterministicZero: P(WetGrass | ¬Sprinkler, ¬Rain) = 0 in
// world.Sprinkler (AIMA 3rd ed. Fig. 14.12(a)). Ancestral sampling must
// never draw the impossible configuration, and the sampled frequency of
// WetGrass must match the exact marginal P(w) = 0.6471 (hand-computed from
// the tables: Σ_c P(c) Σ_s,r P(s|c) P(r|c) P(w|s,r)) within 4 standard
// errors.
func TestSprinklerDeterministicZero(t *testing.T) {
	t.Parallel()
	w, err := Sprinkler()
	if err != nil {
		t.Fatal(err)
	}
	const n = 20000
	full, err := ConditionByName(CondFull)
	if err != nil {
		t.Fatal(err)
	}
	wet, impossible := 0, 0
	_, err = w.Sample(context.Background(), n, full, 1, func(c Context) error {
		obs := map[string]int{}
		for k := range c.Vars {
			obs[c.Entity(k)] = c.Values[k]
		}
		if obs["Sprinkler"] == 0 && obs["Rain"] == 0 && obs["WetGrass"] == 1 {
			impossible++
		}
		wet += obs["WetGrass"]
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if impossible > 0 {
		t.Errorf("%d of %d samples have WetGrass without Sprinkler or Rain", impossible, n)
	}
	wv, _ := w.Index("WetGrass")
	p, err := w.Posterior(wv, nil)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(p[1]-0.6471) > 1e-12 {
		t.Errorf("P(WetGrass) = %.6f, want 0.6471", p[1])
	}
	got, se := float64(wet)/n, math.Sqrt(p[1]*(1-p[1])/n)
	if math.Abs(got-p[1]) > 4*se {
		t.Errorf("sampled P(WetGrass) = %.4f, exact %.4f (4 standard errors %.4f)", got, p[1], 4*se)
	}
}

// TestPublishedTable checks the structure of every published network: its
// size, the byte order of its labels (New enforces it) and how many pairs
// PublishedHeldOut and PickHeldOut (MI ≥ 0.001 nats) hold out. Survey and
// Cancer have no dependent non-adjacent pair that strong (their largest
// mutual informations are 0.00009 and 0.00026 nats).
func TestPublishedTable(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name             string
		build            func() (*World, error)
		vars, edges      int
		dist2, dist3, mi int
	}{
		{"asia", Asia, 8, 8, 20, 9, 10},
		{"survey", Survey, 6, 6, 9, 2, 0},
		{"cancer", Cancer, 5, 4, 6, 0, 0},
		{"burglary", Burglary, 5, 4, 6, 0, 3},
		{"sprinkler", Sprinkler, 4, 4, 2, 0, 2},
		{"student", Student, 5, 4, 6, 2, 4},
	} {
		w, err := c.build()
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if w.NumVars() != c.vars || len(w.Edges()) != c.edges {
			t.Errorf("%s: %d variables and %d edges, want %d and %d", c.name, w.NumVars(), len(w.Edges()), c.vars, c.edges)
		}
		if got := len(PublishedHeldOut(w, 2)); got != c.dist2 {
			t.Errorf("%s: %d pairs at distance ≥ 2, want %d", c.name, got, c.dist2)
		}
		if got := len(PublishedHeldOut(w, 3)); got != c.dist3 {
			t.Errorf("%s: %d pairs at distance ≥ 3, want %d", c.name, got, c.dist3)
		}
		p, err := w.PickHeldOut(1000, 0.001, 1)
		if err != nil {
			t.Fatal(err)
		}
		if len(p) != c.mi {
			t.Errorf("%s: %d pairs with MI ≥ 0.001 nats, want %d", c.name, len(p), c.mi)
		}
	}
}
