package router

import (
	"context"
	"fmt"
	"slices"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// wideGraph is greenhouse with a target of k values ("level-00"…), reached
// from vent-north through humidity-zone1 (a strong chain) and directly
// through a weak pair, so that the decision is chained and its labels and
// bridge need more than chainBlockSmall strings when k > 7.
func wideGraph(k int) *memGraph {
	b := newMemBuilder(1)
	hum := b.entity("humidity-zone1", "high", "low")
	labels := make([]string, k)
	for i := range labels {
		labels[i] = fmt.Sprintf("level-%02d", i)
	}
	tank := b.entity("tank-level", labels...)
	vent := b.entity("vent-north", "closed", "open")
	b.pair(vent, hum, 90, 10, 12, 88)
	ht := make([]uint32, 2*k)
	vt := make([]uint32, 2*k)
	for v := 0; v < k; v++ {
		ht[v] = uint32(5 + 40*(v%2)) // high humidity: odd levels
		ht[k+v] = uint32(45 - 40*(v%2))
		vt[v], vt[k+v] = 1, uint32(v%3)
	}
	b.pair(hum, tank, ht...)
	b.pair(vent, tank, vt...)
	return b.build()
}

// pairGraph holds one pair, so no chain exists.
func pairGraph() *memGraph {
	b := newMemBuilder(1)
	hum := b.entity("humidity-zone1", "high", "low")
	vent := b.entity("vent-north", "closed", "open")
	b.pair(vent, hum, 90, 10, 12, 88)
	return b.build()
}

// deepCopy returns a Decision whose slices share nothing with d.
func deepCopy(d Decision) Decision {
	c := d
	c.Values = slices.Clone(d.Values)
	c.Bridges = slices.Clone(d.Bridges)
	c.Estimate = slices.Clone(d.Estimate)
	c.Direct.Estimate = slices.Clone(d.Direct.Estimate)
	if d.Chain != nil {
		cr := *d.Chain
		cr.Bridges = slices.Clone(cr.Bridges)
		cr.Estimate = slices.Clone(cr.Estimate)
		c.Chain = &cr
	}
	return c
}

func sameDecision(a, b Decision) bool {
	if !slices.Equal(a.Values, b.Values) || !slices.Equal(a.Bridges, b.Bridges) ||
		!slices.Equal(a.Estimate, b.Estimate) || !slices.Equal(a.Direct.Estimate, b.Direct.Estimate) ||
		a.Err != b.Err || a.Mode != b.Mode || (a.Chain == nil) != (b.Chain == nil) {
		return false
	}
	if a.Chain == nil {
		return true
	}
	return slices.Equal(a.Chain.Bridges, b.Chain.Bridges) && slices.Equal(a.Chain.Estimate, b.Chain.Estimate) &&
		a.Chain.Err == b.Chain.Err && a.Chain.MinSupport == b.Chain.MinSupport
}

// TestUncachedDecideAllocs pins the owned-result layout (resultBlock): an
// uncached decision on a graph whose Name does not allocate makes two
// allocations, chained or not, with few or many labels, and its slices
// have no spare capacity (an append by the caller cannot reach the label
// bytes stored after the estimates). Decisions kept by the caller survive
// later decisions unchanged (the scorer's borrowed Dist never leaks out).
func TestUncachedDecideAllocs(t *testing.T) { // not parallel: AllocsPerRun
	ctx := context.Background()
	cases := []struct {
		name    string
		g       *memGraph
		q       Query
		chained bool
		allocs  float64
	}{
		{"chained, 2 labels + 1 bridge", greenhouse(1), Query{From: "vent-north", Value: "open", To: "bed-tomato"}, true, 2},
		{"direct only", pairGraph(), Query{From: "vent-north", Value: "open", To: "humidity-zone1"}, false, 2},
		{"chained, 7 labels + 1 bridge (one block)", wideGraph(7), Query{From: "vent-north", Value: "closed", To: "tank-level"}, true, 2},
		// More strings than chainBlockSmall: the ChainResult is a third block.
		{"chained, 12 labels + 1 bridge", wideGraph(12), Query{From: "vent-north", Value: "closed", To: "tank-level"}, true, 3},
	}
	for _, tc := range cases {
		r := mustNew(t, tc.g, WithCacheSize(0))
		d, err := r.Decide(ctx, tc.q)
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		if (d.Chain != nil) != tc.chained {
			t.Fatalf("%s: chain %+v, want chained=%v", tc.name, d.Chain, tc.chained)
		}
		for name, n := range map[string][2]int{
			"Values": {len(d.Values), cap(d.Values)}, "Direct.Estimate": {len(d.Direct.Estimate), cap(d.Direct.Estimate)},
		} {
			if n[0] != n[1] {
				t.Errorf("%s: %s len %d cap %d", tc.name, name, n[0], n[1])
			}
		}
		if d.Chain != nil && (cap(d.Chain.Estimate) != len(d.Chain.Estimate) || cap(d.Chain.Bridges) != len(d.Chain.Bridges)) {
			t.Errorf("%s: chain slices have spare capacity: %d/%d, %d/%d", tc.name,
				len(d.Chain.Estimate), cap(d.Chain.Estimate), len(d.Chain.Bridges), cap(d.Chain.Bridges))
		}
		keep := deepCopy(d)
		got := testing.AllocsPerRun(100, func() {
			if _, err := r.Decide(ctx, tc.q); err != nil {
				t.Fatal(err)
			}
		})
		if got != tc.allocs && !raceEnabled {
			t.Errorf("%s: %v allocations per uncached decision, want %v", tc.name, got, tc.allocs)
		}
		if !sameDecision(d, keep) {
			t.Errorf("%s: a kept decision changed after later decisions:\n%+v\nwas\n%+v", tc.name, d, keep)
		}
		// Appending to the returned slices must not disturb the labels.
		_ = append(d.Direct.Estimate, -1)
		if d.Chain != nil {
			_ = append(d.Chain.Estimate, -1)
		}
		if !slices.Equal(d.Values, keep.Values) || !slices.Equal(d.Bridges, keep.Bridges) {
			t.Errorf("%s: appending to an estimate changed the labels: %v %v", tc.name, d.Values, d.Bridges)
		}
	}
}

// cloningGraph's Name hands out copies, as *graphidx.Index does.
type cloningGraph struct{ *memGraph }

func (g cloningGraph) Name(id graphidx.EntityID) string { return strings.Clone(g.memGraph.Name(id)) }

// appendingGraph adds NameAppender to cloningGraph and counts its calls.
type appendingGraph struct {
	cloningGraph
	appends *int
}

func (g appendingGraph) AppendName(dst []byte, id graphidx.EntityID) []byte {
	*g.appends++
	return append(dst, g.memGraph.Name(id)...)
}

// TestNameAppender checks that a graph with AppendName gives the same
// decisions as one with only Name, reads each bridge name once through
// AppendName, and spares the per-bridge copy (Name of cloningGraph
// allocates like *graphidx.Index's).
func TestNameAppender(t *testing.T) { // not parallel: AllocsPerRun
	ctx := context.Background()
	n := 0
	plain := mustNew(t, cloningGraph{greenhouse(1)}, WithCacheSize(0))
	withApp := mustNew(t, appendingGraph{cloningGraph{greenhouse(1)}, &n}, WithCacheSize(0))
	queries := []Query{
		{From: "vent-north", Value: "open", To: "bed-tomato"},
		{From: "vent-north", Value: "closed", To: "bed-tomato"},
		{From: "bed-tomato", Value: "wet", To: "vent-north"},
		{From: "pump-2", Value: "on", To: "humidity-zone1"},
	}
	bridges := 0
	for _, q := range queries {
		a, err := plain.Decide(ctx, q)
		if err != nil {
			t.Fatal(err)
		}
		b, err := withApp.Decide(ctx, q)
		if err != nil {
			t.Fatal(err)
		}
		if !sameDecision(a, b) {
			t.Errorf("%+v: with AppendName %+v, without %+v", q, b, a)
		}
		if a.Chain != nil {
			bridges += len(a.Chain.Bridges)
		}
	}
	if bridges == 0 || n != bridges {
		t.Errorf("AppendName called %d times for %d bridges", n, bridges)
	}
	q := queries[0]
	for _, c := range []struct {
		name string
		r    *Router
		want float64
	}{{"Name only", plain, 3}, {"AppendName", withApp, 2}} {
		got := testing.AllocsPerRun(100, func() {
			if _, err := c.r.Decide(ctx, q); err != nil {
				t.Fatal(err)
			}
		})
		if got != c.want && !raceEnabled {
			t.Errorf("%s: %v allocations per uncached one-bridge decision, want %v", c.name, got, c.want)
		}
	}
}
