package testgraph

import (
	"slices"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

func TestBuilder(t *testing.T) {
	t.Parallel()
	b := GreenhouseBuilder(7)
	bed, hum, pump, vent := graphidx.EntityID(0), graphidx.EntityID(1), graphidx.EntityID(2), graphidx.EntityID(3)
	g := b.Build()
	if g.Generation() != 7 || g.NumEntities() != 4 || g.Name(vent) != "vent-north" {
		t.Fatalf("generation %d, %d entities, entity 3 %q", g.Generation(), g.NumEntities(), g.Name(vent))
	}
	if got := g.Values(vent); !slices.Equal(got, []string{"closed", "open"}) {
		t.Errorf("values %v", got)
	}
	ps, ok := g.Pair(hum, vent) // the transpose of (vent, hum) = 90 10 / 12 88
	if !ok || ps.Count(0, 1) != 12 || ps.Count(1, 0) != 10 || ps.Support() != 200 {
		t.Errorf("transpose: %+v %v", ps, ok)
	}
	if got := g.Neighbors(bed); !slices.Equal(got, []graphidx.EntityID{hum, pump}) {
		t.Errorf("neighbours %v", got)
	}
	g.SetRankPrefix(1)
	if got := g.RankedNeighbors(vent); !slices.Equal(got, []graphidx.EntityID{hum}) { // support 200 before 6
		t.Errorf("ranked prefix 1: %v", got)
	}
	if i, ok := g.ValueIndex(hum, "low"); !ok || i != 1 {
		t.Errorf("ValueIndex(low) = %d, %v", i, ok)
	}
	g.Close()
	if g.Closes() != 1 {
		t.Errorf("closes %d", g.Closes())
	}
	defer func() {
		if recover() == nil {
			t.Error("use after Close did not panic")
		}
	}()
	g.Lookup("vent-north")
}

func TestGeneratorsAreDeterministic(t *testing.T) {
	t.Parallel()
	a, b := Random(3, 30, 0.2, "bed%02d"), Random(3, 30, 0.2, "bed%02d")
	for i := range 30 {
		id := graphidx.EntityID(i)
		if !slices.Equal(a.Neighbors(id), b.Neighbors(id)) || a.Name(id) != b.Name(id) {
			t.Fatalf("Random not deterministic at %d", i)
		}
	}
	p, q := NewPowerLaw(500, 8, 2.1, 1), NewPowerLaw(500, 8, 2.1, 1)
	var ep, eq []graphidx.PairRecord
	p.Pairs(func(r graphidx.PairRecord) error { ep = append(ep, r); return nil })
	q.Pairs(func(r graphidx.PairRecord) error { eq = append(eq, r); return nil })
	if len(ep) == 0 || len(ep) != len(eq) || p.Contexts() != q.Contexts() {
		t.Fatalf("PowerLaw: %d vs %d pairs", len(ep), len(eq))
	}
	// The largest-weight entity is a hub: its degree is far above the mean.
	deg := make([]int, 500)
	for _, r := range ep {
		deg[r.A]++
		deg[r.B]++
	}
	if mean := 2 * float64(len(ep)) / 500; float64(deg[0]) < 5*mean {
		t.Errorf("entity 0 degree %d, mean %.1f: no hub", deg[0], mean)
	}
}
