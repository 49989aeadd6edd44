package world

import (
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestBetaRandMoments checks the Marsaglia–Tsang Beta sampler against the
// Beta mean and variance from gonum stat/distuv (docs/DESIGN.md, External checks,
// names distuv as the reference library), within 5 standard errors of 200k draws.
func TestBetaRandMoments(t *testing.T) {
	t.Parallel()
	cases := []struct{ a, b float64 }{
		{0.2, 0.2}, // the default CPT prior (docs/DESIGN.md, Testbed)
		{0.5, 3},
		{2, 5},
		{1, 1},
		{0.05, 0.05}, // tiny shapes must not underflow to NaN
	}
	for _, c := range cases {
		ref := distuv.Beta{Alpha: c.a, Beta: c.b}
		r := rand.New(rand.NewPCG(uint64(c.a*1000), uint64(c.b*1000)))
		const n = 200000
		var s, s2 float64
		for range n {
			x := betaRand(r, c.a, c.b)
			if !(x >= 0 && x <= 1) {
				t.Fatalf("Beta(%v,%v) drew %v", c.a, c.b, x)
			}
			s += x
			s2 += x * x
		}
		mean := s / n
		variance := s2/n - mean*mean
		if se := math.Sqrt(ref.Variance() / n); math.Abs(mean-ref.Mean()) > 5*se {
			t.Errorf("Beta(%v,%v): mean %v, want %v", c.a, c.b, mean, ref.Mean())
		}
		if math.Abs(variance-ref.Variance()) > 0.02*ref.Variance()+1e-4 {
			t.Errorf("Beta(%v,%v): variance %v, want %v", c.a, c.b, variance, ref.Variance())
		}
	}
}

func TestGenerateStructure(t *testing.T) {
	t.Parallel()
	cases := []Config{
		{Vars: 100, Edges: 100},
		{Vars: 50, Edges: 120, MaxParents: 3},
		{Vars: 10, Edges: 45},            // complete DAG, exercises the fallback
		{Vars: 20, Edges: 30, Values: 3}, // K-valued
		{Vars: 5, Edges: -1},             // no edges
		{Vars: 200, Edges: 250, MaxParents: 2},
	}
	for i, cfg := range cases {
		w, err := Generate(cfg, int64(i))
		if err != nil {
			t.Fatalf("case %d: %v", i, err)
		}
		want := max(cfg.Edges, 0)
		if got := len(w.Edges()); got != want {
			t.Errorf("case %d: %d edges, want %d", i, got, want)
		}
		for v := range w.NumVars() {
			if cfg.MaxParents > 0 && len(w.Parents(v)) > cfg.MaxParents {
				t.Errorf("case %d: %s has %d parents", i, w.Name(v), len(w.Parents(v)))
			}
			k := max(cfg.Values, 2)
			if w.Card(v) != k {
				t.Errorf("case %d: card %d", i, w.Card(v))
			}
		}
		w2, err := Generate(cfg, int64(i))
		if err != nil {
			t.Fatal(err)
		}
		for v := range w.NumVars() {
			if !slices.Equal(w.CPT(v), w2.CPT(v)) || !slices.Equal(w.Parents(v), w2.Parents(v)) {
				t.Fatalf("case %d: not deterministic", i)
			}
		}
	}
	w, _ := Generate(Config{Vars: 1000, Edges: 1}, 1)
	if w.Name(0) != "v000" || w.Name(999) != "v999" {
		t.Errorf("names %q %q", w.Name(0), w.Name(999))
	}
	w, _ = Generate(Config{Vars: 12, Values: 12}, 1)
	if l := w.Labels(0); l[0] != "00" || l[11] != "11" {
		t.Errorf("labels %v", l)
	}
	bad := []Config{
		{Vars: -1},
		{Vars: 4, Edges: 7},
		{Vars: 4, Edges: 4, MaxParents: 1},
		{Values: 1},
		{Values: 65},
		{CPTAlpha: -1},
		{Vars: 2, Names: []string{"a"}},
		{Values: 2, Labels: []string{"a"}},
		{MinHeldOutMI: -1},
		{MaxParents: -2},
	}
	for _, cfg := range bad {
		if _, err := Generate(cfg, 1); !errors.Is(err, ErrInvalidConfig) {
			t.Errorf("Generate(%+v): err = %v", cfg, err)
		}
	}
	if _, err := Generate(Config{Vars: 2, Edges: 1, Names: []string{"b", "b"}}, 1); !errors.Is(err, ErrInvalidVariable) {
		t.Errorf("duplicate names: %v", err)
	}
}

// TestMaxEdgesAndCPTFits checks the two limits of Generate by hand: the
// edges placeable under a parent cap (Σ_pos min(pos, P)), and the size of a
// conditional table K^(P+1) against MaxCPTCells; and Generate refusing a
// network whose table would not fit, naming the variable.
func TestMaxEdgesAndCPTFits(t *testing.T) {
	t.Parallel()
	for _, c := range []struct{ vars, parents, want int }{
		{10, 0, 45}, {10, 1, 9}, {10, 3, 0 + 1 + 2 + 3*7}, {1, 0, 0}, {0, 2, 0},
	} {
		if got := MaxEdges(c.vars, c.parents); got != c.want {
			t.Errorf("MaxEdges(%d, %d) = %d, want %d", c.vars, c.parents, got, c.want)
		}
	}
	for _, c := range []struct {
		k, parents int
		want       bool
	}{
		{2, 21, true},  // 2^22 cells
		{2, 22, false}, // 2^23
		{64, 2, true},  // 2^18
		{64, 3, false}, // 2^24
		{4, 10, true},  // 4^11 = 2^22
		{4, 11, false}, // 4^12
		{3, 0, true},
		{0, 1, false},
		{2, -1, false},
	} {
		if got := CPTFits(c.k, c.parents); got != c.want {
			t.Errorf("CPTFits(%d, %d) = %v, want %v", c.k, c.parents, got, c.want)
		}
	}
	// 12 variables, every pair an edge: the last variable has 11 parents;
	// with 4 values its table has 4^12 cells.
	_, err := Generate(Config{Vars: 12, Edges: 66, Values: 4}, 1)
	if !errors.Is(err, ErrInvalidConfig) {
		t.Fatalf("dense 4-valued network: error %v, want ErrInvalidConfig", err)
	}
	if _, err := Generate(Config{Vars: 12, Edges: 30, Values: 4, MaxParents: 3}, 1); err != nil {
		t.Errorf("capped network: %v", err)
	}
}
