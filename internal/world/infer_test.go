package world

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

var tf = []string{"false", "true"}

// burglary returns Burglary (AIMA 3rd ed. §14.2 / Fig. 14.2).
// Variable order: B, E, A, J, M. Value 1 = true.
func burglary(t testing.TB) *World {
	t.Helper()
	w, err := Burglary()
	if err != nil {
		t.Fatal(err)
	}
	return w
}

// sprinkler returns Sprinkler (AIMA 3rd ed. §14.5 / Fig. 14.12(a)).
// Variable order: Cloudy, Sprinkler, Rain, WetGrass.
func sprinkler(t testing.TB) *World {
	t.Helper()
	w, err := Sprinkler()
	if err != nil {
		t.Fatal(err)
	}
	return w
}

func concat(rows ...[]float64) []float64 {
	var out []float64
	for _, r := range rows {
		out = append(out, r...)
	}
	return out
}

func TestBurglaryAIMA(t *testing.T) {
	t.Parallel()
	w := burglary(t)
	const B, E, A, J, M = 0, 1, 2, 3, 4

	// AIMA 3rd ed. §14.4.1: P(B | j, m) = ⟨0.284, 0.716⟩; 0.28417184 to 8 digits
	// (docs/DESIGN.md, External checks).
	p, err := w.Posterior(B, map[int]int{J: 1, M: 1})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(p[1]-0.28417184) > 1e-6 || math.Abs(p[0]-0.71582816) > 1e-6 {
		t.Errorf("P(B | j, m) = %v, want ⟨0.716, 0.284⟩ in (false, true) order", p)
	}
	// AIMA 3rd ed. §14.2.1: P(j, m, a, ¬b, ¬e) = 0.000628 (printed to 3 digits).
	j, err := w.Joint(map[int]int{J: 1, M: 1, A: 1, B: 0, E: 0})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(j-0.000628) > 5e-7 {
		t.Errorf("P(j,m,a,¬b,¬e) = %v, want 0.000628", j)
	}
	// The chain rule on the same CPT entries (AIMA eq. 14.2), to rounding.
	if want := 0.90 * 0.70 * 0.001 * 0.999 * 0.998; math.Abs(j-want) > 1e-15 {
		t.Errorf("P(j,m,a,¬b,¬e) = %v, want %v", j, want)
	}
	// AIMA 3rd ed. §14.4.1: P(B | j, m) = α⟨0.00059224, 0.0014919⟩, so
	// P(j, m) = 0.00208414 (from memory; agrees with the posterior above).
	jm, err := w.Joint(map[int]int{J: 1, M: 1})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(jm-0.00208414) > 5e-7 { // the printed terms are rounded
		t.Errorf("P(j, m) = %v, want 0.00208414", jm)
	}
}

func TestSprinklerAIMA(t *testing.T) {
	t.Parallel()
	w := sprinkler(t)
	// AIMA 3rd ed. §14.5.1: P(Rain | Sprinkler = true) = ⟨0.3, 0.7⟩.
	p, err := w.Posterior(2, map[int]int{1: 1})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(p[1]-0.3) > 1e-12 || math.Abs(p[0]-0.7) > 1e-12 {
		t.Errorf("P(Rain | s) = %v, want ⟨0.7, 0.3⟩ in (false, true) order", p)
	}
	q, err := w.TrueConditional(1, 1, 2)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(q[1]-0.3) > 1e-12 {
		t.Errorf("TrueConditional = %v", q)
	}
	// W=true with S=false, R=false is impossible (P(W|¬S,¬R) = 0).
	if _, err := w.Posterior(0, map[int]int{1: 0, 2: 0, 3: 1}); !errors.Is(err, ErrImpossibleEvidence) {
		t.Errorf("impossible evidence: err = %v, want ErrImpossibleEvidence", err)
	}
}

// randomSmall returns a random network of 2..10 variables with 2 or 3 values
// and up to 3 parents per variable.
func randomSmall(t testing.TB, seed int64) *World {
	t.Helper()
	r := rand.New(rand.NewPCG(uint64(seed), 7))
	n := 2 + r.IntN(9)
	k := 2 + r.IntN(2)
	maxE := 0
	for pos := range n {
		maxE += min(pos, 3)
	}
	e := r.IntN(maxE + 1)
	if e == 0 {
		e = -1 // no edges
	}
	w, err := Generate(Config{Vars: n, Edges: e, MaxParents: 3, Values: k, CPTAlpha: 0.7, CPTBeta: 0.7}, seed)
	if err != nil {
		t.Fatal(err)
	}
	return w
}

// enumerate returns the full joint table, row-major over variables 0..N−1.
func enumerate(w *World) ([]float64, []int) {
	n := w.NumVars()
	card := make([]int, n)
	for v := range n {
		card[v] = w.Card(v)
	}
	joint := make([]float64, size(card))
	a := make([]int, n)
	for i := range joint {
		rem := i
		for v := n - 1; v >= 0; v-- {
			a[v] = rem % card[v]
			rem /= card[v]
		}
		p := 1.0
		for v := range n {
			c := 0
			for j, q := range w.parents[v] {
				c += a[q] * w.strides[v][j]
			}
			p *= w.cpt[v][c*card[v]+a[v]]
		}
		joint[i] = p
	}
	return joint, card
}

// TestVariableEliminationBruteForce checks every inference entry point
// against enumeration of the full joint (common practice), on 200 random
// networks of at most 10 variables, to 1e-9.
func TestVariableEliminationBruteForce(t *testing.T) {
	t.Parallel()
	for seed := range int64(200) {
		w := randomSmall(t, seed)
		joint, card := enumerate(w)
		n := w.NumVars()
		r := rand.New(rand.NewPCG(uint64(seed), 11))
		assign := func(i int) []int {
			a := make([]int, n)
			for v := n - 1; v >= 0; v-- {
				a[v] = i % card[v]
				i /= card[v]
			}
			return a
		}
		total := 0.0
		for _, p := range joint {
			total += p
		}
		if math.Abs(total-1) > 1e-9 {
			t.Fatalf("seed %d: joint sums to %v", seed, total)
		}
		for trial := 0; trial < 5; trial++ {
			// Random evidence on a random subset, query outside it.
			q := r.IntN(n)
			ev := map[int]int{}
			for v := range n {
				if v != q && r.IntN(3) == 0 {
					ev[v] = r.IntN(card[v])
				}
			}
			want := make([]float64, card[q])
			pe := 0.0
			for i, p := range joint {
				a := assign(i)
				ok := true
				for v, x := range ev {
					if a[v] != x {
						ok = false
						break
					}
				}
				if ok {
					want[a[q]] += p
					pe += p
				}
			}
			pj, err := w.Joint(ev)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(pj-pe) > 1e-9 {
				t.Errorf("seed %d: Joint(%v) = %v, want %v", seed, ev, pj, pe)
			}
			got, err := w.Posterior(q, ev)
			if pe == 0 {
				if !errors.Is(err, ErrImpossibleEvidence) {
					t.Errorf("seed %d: zero-probability evidence gave %v, %v", seed, got, err)
				}
				continue
			}
			if err != nil {
				t.Fatal(err)
			}
			for x := range want {
				if math.Abs(got[x]-want[x]/pe) > 1e-9 {
					t.Errorf("seed %d: P(%d | %v) = %v, want %v", seed, q, ev, got, want)
					break
				}
			}
		}
		if n >= 2 {
			a, b := r.IntN(n), r.IntN(n-1)
			if b >= a {
				b++
			}
			want := make([]float64, card[a]*card[b])
			for i, p := range joint {
				x := assign(i)
				want[x[a]*card[b]+x[b]] += p
			}
			got, err := w.JointMarginal(a, b)
			if err != nil {
				t.Fatal(err)
			}
			for i := range want {
				if math.Abs(got[i]-want[i]) > 1e-9 {
					t.Errorf("seed %d: P(%d,%d) = %v, want %v", seed, a, b, got, want)
					break
				}
			}
		}
	}
}

func TestInferenceErrors(t *testing.T) {
	t.Parallel()
	w := burglary(t)
	cases := []struct {
		name string
		err  error
		call func() error
	}{
		{"query out of range", ErrVariableRange, func() error { _, err := w.Posterior(9, nil); return err }},
		{"evidence value out of range", ErrValueRange, func() error { _, err := w.Posterior(0, map[int]int{1: 2}); return err }},
		{"negative evidence var", ErrVariableRange, func() error { _, err := w.Joint(map[int]int{-1: 0}); return err }},
		{"joint marginal self", ErrInvalidConfig, func() error { _, err := w.JointMarginal(1, 1); return err }},
		{"conditional bad value", ErrValueRange, func() error { _, err := w.TrueConditional(0, 5, 1); return err }},
	}
	for _, c := range cases {
		if err := c.call(); !errors.Is(err, c.err) {
			t.Errorf("%s: err = %v, want %v", c.name, err, c.err)
		}
	}
}

func TestNewRejects(t *testing.T) {
	t.Parallel()
	ok := []float64{0.5, 0.5}
	cases := []struct {
		name string
		vars []Variable
		err  error
	}{
		{"empty", nil, ErrInvalidVariable},
		{"empty name", []Variable{{Labels: tf, CPT: ok}}, ErrInvalidVariable},
		{"duplicate", []Variable{{Name: "a", Labels: tf, CPT: ok}, {Name: "a", Labels: tf, CPT: ok}}, ErrInvalidVariable},
		{"unsorted labels", []Variable{{Name: "a", Labels: []string{"on", "off"}, CPT: ok}}, ErrInvalidVariable},
		{"one label", []Variable{{Name: "a", Labels: []string{"x"}, CPT: []float64{1}}}, ErrInvalidVariable},
		{"cpt size", []Variable{{Name: "a", Labels: tf, CPT: []float64{1}}}, ErrInvalidVariable},
		{"cpt sum", []Variable{{Name: "a", Labels: tf, CPT: []float64{0.5, 0.6}}}, ErrBadCPT},
		{"cpt nan", []Variable{{Name: "a", Labels: tf, CPT: []float64{math.NaN(), 1}}}, ErrBadCPT},
		{"cpt negative", []Variable{{Name: "a", Labels: tf, CPT: []float64{-0.5, 1.5}}}, ErrBadCPT},
		{"parent range", []Variable{{Name: "a", Labels: tf, Parents: []int{3}, CPT: ok}}, ErrInvalidVariable},
		{"self parent", []Variable{{Name: "a", Labels: tf, Parents: []int{0}, CPT: concat(ok, ok)}}, ErrInvalidVariable},
		{"cycle", []Variable{
			{Name: "a", Labels: tf, Parents: []int{1}, CPT: concat(ok, ok)},
			{Name: "b", Labels: tf, Parents: []int{0}, CPT: concat(ok, ok)},
		}, ErrCyclic},
	}
	for _, c := range cases {
		if _, err := New(c.vars); !errors.Is(err, c.err) {
			t.Errorf("%s: err = %v, want %v", c.name, err, c.err)
		}
	}
}

// TestTrueChainExactOnPolytrees checks the claim of docs/DESIGN.md, Error
// model, that the chained estimate is exact when each bridge screens off
// the two sides: on random polytrees, the chain through MinimalSeparatorPath equals the exact
// conditional for every dependent pair (d-separation, Pearl 1988 §3.3).
func TestTrueChainExactOnPolytrees(t *testing.T) {
	t.Parallel()
	for seed := range int64(20) {
		w := randomPolytree(t, 12, seed)
		n := w.NumVars()
		for a := range n {
			for b := range n {
				if a == b || !w.anc[a].intersects(w.anc[b]) {
					continue
				}
				bridges, err := w.MinimalSeparatorPath(a, b)
				if err != nil {
					t.Fatal(err)
				}
				if len(bridges)+1 != w.Distance(a, b) {
					t.Fatalf("seed %d: path %d→%d has %d bridges, distance %d", seed, a, b, len(bridges), w.Distance(a, b))
				}
				for u := range w.Card(a) {
					want, err := w.TrueConditional(a, u, b)
					if err != nil {
						t.Fatal(err)
					}
					got, err := w.TrueChain(a, u, bridges, b)
					if err != nil {
						t.Fatal(err)
					}
					for x := range want {
						if math.Abs(got[x]-want[x]) > 1e-9 {
							t.Fatalf("seed %d: chain %d→%v→%d = %v, exact %v", seed, a, bridges, b, got, want)
						}
					}
				}
			}
		}
	}
}

// randomPolytree returns a random directed tree: variable v > 0 joins a
// uniformly chosen earlier variable with a random orientation.
func randomPolytree(t testing.TB, n int, seed int64) *World {
	t.Helper()
	r := rand.New(rand.NewPCG(uint64(seed), 5))
	parents := make([][]int, n)
	for v := 1; v < n; v++ {
		u := r.IntN(v)
		if r.IntN(2) == 0 {
			parents[v] = append(parents[v], u)
		} else {
			parents[u] = append(parents[u], v)
		}
	}
	vars := make([]Variable, n)
	for v := range n {
		rows := 1 << len(parents[v])
		cpt := make([]float64, 2*rows)
		for c := range rows {
			p := 0.05 + 0.9*r.Float64()
			cpt[2*c], cpt[2*c+1] = 1-p, p
		}
		vars[v] = Variable{Name: "n" + string(rune('a'+v)), Labels: []string{"0", "1"}, Parents: parents[v], CPT: cpt}
	}
	w, err := New(vars)
	if err != nil {
		t.Fatal(err)
	}
	return w
}

func TestMinimalSeparatorPathBurglary(t *testing.T) {
	t.Parallel()
	w := burglary(t)
	const B, E, A, J, M = 0, 1, 2, 3, 4
	cases := []struct {
		from, to int
		want     []int
	}{
		{J, M, []int{A}}, // trek J ← A → M
		{B, J, []int{A}}, // directed B → A → J
		{J, B, []int{A}}, // reversed
		{B, E, []int{A}}, // independent: falls back to the skeleton path through the collider
		{B, A, nil},      // adjacent
	}
	for _, c := range cases {
		got, err := w.MinimalSeparatorPath(c.from, c.to)
		if err != nil {
			t.Fatal(err)
		}
		if len(got) != len(c.want) || (len(got) > 0 && got[0] != c.want[0]) {
			t.Errorf("MinimalSeparatorPath(%s, %s) = %v, want %v", w.Name(c.from), w.Name(c.to), got, c.want)
		}
	}
	// Disconnected pair.
	w2, err := New([]Variable{{Name: "x", Labels: tf, CPT: []float64{0.5, 0.5}}, {Name: "y", Labels: tf, CPT: []float64{0.5, 0.5}}})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := w2.MinimalSeparatorPath(0, 1); !errors.Is(err, ErrNoPath) {
		t.Errorf("disconnected: err = %v, want ErrNoPath", err)
	}
}

func TestRandomBridges(t *testing.T) {
	t.Parallel()
	w := burglary(t)
	r := rand.New(rand.NewPCG(1, 2))
	for range 100 {
		b, err := w.RandomBridges(r, 3, 0, 4)
		if err != nil {
			t.Fatal(err)
		}
		seen := map[int]bool{}
		for _, v := range b {
			if v == 0 || v == 4 || seen[v] {
				t.Fatalf("bad bridges %v", b)
			}
			seen[v] = true
		}
	}
	if _, err := w.RandomBridges(r, 4, 0, 4); !errors.Is(err, ErrTooFewVariables) {
		t.Errorf("err = %v, want ErrTooFewVariables", err)
	}
}

// TestTrueConditionalConcurrent exercises the inference cache from several
// goroutines (run with -race) and checks every answer against an uncached
// posterior.
func TestTrueConditionalConcurrent(t *testing.T) {
	t.Parallel()
	w, err := Generate(Config{Vars: 40, Edges: 50}, 9)
	if err != nil {
		t.Fatal(err)
	}
	errs := make(chan error, 4)
	for g := range 4 {
		go func() {
			r := rand.New(rand.NewPCG(uint64(g), 1))
			for range 200 {
				a, b, u := r.IntN(40), r.IntN(40), r.IntN(2)
				got, err := w.TrueConditional(a, u, b)
				if errors.Is(err, ErrImpossibleEvidence) {
					continue
				}
				if err != nil {
					errs <- err
					return
				}
				want, _ := w.Posterior(b, map[int]int{a: u})
				if math.Abs(got[0]-want[0]) > 1e-12 {
					errs <- errors.New("cached conditional differs from posterior")
					return
				}
			}
			errs <- nil
		}()
	}
	for range 4 {
		if err := <-errs; err != nil {
			t.Error(err)
		}
	}
}
