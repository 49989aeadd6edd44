package eval

import (
	"math"
	"testing"
)

func TestSpearman(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name string
		x, y []float64
		want float64
	}{
		// No ties: ρ = 1 − 6Σd²/(n(n²−1)) = 1 − 6·4/(5·24) = 0.8 (Spearman's
		// formula, common practice).
		{"swaps", []float64{1, 2, 3, 4, 5}, []float64{2, 1, 4, 3, 5}, 0.8},
		// Monotone transforms keep ρ = ±1.
		{"monotone", []float64{0.1, 0.5, 0.2, 9}, []float64{1, 25, 4, 8100}, 1},
		{"reversed", []float64{1, 2, 3}, []float64{30, 20, 10}, -1},
		// Ties: ranks x = (1, 2.5, 2.5, 4), y = (1, 2, 3, 4); Pearson of the
		// ranks = 4.5 / sqrt(4.5·5) = 0.9486833 (hand computation).
		{"ties", []float64{1, 2, 2, 3}, []float64{1, 2, 3, 4}, 4.5 / math.Sqrt(4.5*5)},
	}
	for _, c := range cases {
		if got := Spearman(c.x, c.y); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("%s: Spearman = %v, want %v", c.name, got, c.want)
		}
	}
	if !math.IsNaN(Spearman([]float64{1}, []float64{2})) || !math.IsNaN(Spearman([]float64{1, 2}, []float64{1})) {
		t.Error("Spearman of too few or mismatched samples is not NaN")
	}
}

func TestMidRanks(t *testing.T) {
	t.Parallel()
	got := midRanks([]float64{10, 20, 20, 30, 20})
	want := []float64{1, 3, 3, 5, 3}
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("midRanks = %v, want %v", got, want)
		}
	}
}
