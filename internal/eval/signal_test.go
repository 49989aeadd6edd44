package eval

import (
	"math"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// pairStats is an in-memory scorer.Stats of binary entities.
type pairStats map[[2]graphidx.EntityID][]uint32

func (p pairStats) NumValues(graphidx.EntityID) int { return 2 }
func (p pairStats) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	if c, ok := p[[2]graphidx.EntityID{a, b}]; ok {
		return graphidx.NewPairStats(a, b, 2, 2, c), true
	}
	if c, ok := p[[2]graphidx.EntityID{b, a}]; ok {
		// Transpose into the (a, b) orientation.
		return graphidx.NewPairStats(a, b, 2, 2, []uint32{c[0], c[2], c[1], c[3]}), true
	}
	return graphidx.PairStats{}, false
}

func TestSignalBias(t *testing.T) {
	t.Parallel()
	// 0 → 1 copies its value (counts 100/0, 0/100); 1 → 2 copies too; 1 → 3
	// carries nothing (50/50 in both rows).
	st := pairStats{
		{0, 1}: {100, 0, 0, 100},
		{1, 2}: {100, 0, 0, 100},
		{1, 3}: {50, 50, 50, 50},
	}
	const gamma = 0.5
	sb, err := NewSignalBias(gamma)
	if err != nil {
		t.Fatal(err)
	}
	bay, _ := scorer.NewBayes()
	// Posterior means with α = 1: rows (101, 1)/102 and (1, 101)/102, so
	// δ = 100/102 per copying edge (hand computation) and δ = 0 for 1 → 3.
	if d := contraction(st, 0, 1, 1); math.Abs(d-100.0/102) > 1e-12 {
		t.Errorf("δ(copy) = %v, want %v", d, 100.0/102)
	}
	if d := contraction(st, 1, 3, 1); d != 0 {
		t.Errorf("δ(independent) = %v, want 0", d)
	}
	for _, c := range []struct {
		name string
		t    graphidx.EntityID
		prod float64
	}{
		{"strong chain", 2, (100.0 / 102) * (100.0 / 102)},
		{"flat chain", 3, 0},
	} {
		want, err := bay.Chain(nil, st, 0, 0, []graphidx.EntityID{1}, c.t)
		if err != nil {
			t.Fatal(err)
		}
		got, err := sb.Chain(nil, st, 0, 0, []graphidx.EntityID{1}, c.t)
		if err != nil {
			t.Fatal(err)
		}
		if extra := got.Err - want.Err; math.Abs(extra-gamma*(1-c.prod)*(1-c.prod)) > 1e-12 {
			t.Errorf("%s: extra error %v, want γ(1−Πδ)² = %v", c.name, extra, gamma*(1-c.prod)*(1-c.prod))
		}
	}
	// The flat chain must now cost more than the strong one, although its
	// variance is smaller.
	strong, _ := sb.Chain(nil, st, 0, 0, []graphidx.EntityID{1}, 2)
	flat, _ := sb.Chain(nil, st, 0, 0, []graphidx.EntityID{1}, 3)
	if !(flat.Err > strong.Err) {
		t.Errorf("flat chain Err %v not above strong chain Err %v", flat.Err, strong.Err)
	}
	// Direct answers are unchanged.
	d1, _ := sb.Direct(nil, st, 0, 0, 1)
	d2, _ := bay.Direct(nil, st, 0, 0, 1)
	if d1.Err != d2.Err {
		t.Errorf("direct Err changed: %v vs %v", d1.Err, d2.Err)
	}
	if _, err := NewSignalBias(-1); err == nil {
		t.Error("NewSignalBias(-1) succeeded")
	}
}
