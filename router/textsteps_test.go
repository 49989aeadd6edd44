package router

import (
	"context"
	"errors"
	"math"
	"testing"

	"github.com/hopwise/hopwise/scorer"
)

// pathGraph is vent → humidity → pump → bed with no shorter link, so the
// only chain from the vent to the bed has two bridges.
func pathGraph(gen uint64) *memGraph {
	b := newMemBuilder(gen)
	bed := b.entity("bed-4", "dry", "wet")
	hum := b.entity("humidity-zone1", "high", "low", "mid")
	pump := b.entity("pump-2", "off", "on")
	vent := b.entity("vent-north", "closed", "open")
	b.pair(vent, hum, 70, 20, 10, 5, 80, 15) // rows vent closed/open, cols high/low/mid
	b.pair(hum, pump, 60, 15, 10, 70, 30, 30)
	b.pair(pump, bed, 50, 20, 25, 60)
	return b.build()
}

// meanRows returns the posterior-mean matrix (N[i][j] + α)/(N_i + Kα) of a
// row-major table with k columns, α the chain hop prior
// (scorer.DefaultHopAlpha).
func meanRows(counts []float64, k int) [][]float64 {
	var out [][]float64
	for i := 0; i+k <= len(counts); i += k {
		n := 0.0
		for _, c := range counts[i : i+k] {
			n += c
		}
		row := make([]float64, k)
		for j, c := range counts[i : i+k] {
			row[j] = (c + scorer.DefaultHopAlpha) / (n + float64(k)*scorer.DefaultHopAlpha)
		}
		out = append(out, row)
	}
	return out
}

func vecMat(x []float64, m [][]float64) []float64 {
	out := make([]float64, len(m[0]))
	for i, xi := range x {
		for j, v := range m[i] {
			out[j] += xi * v
		}
	}
	return out
}

// decideOn returns a router over g (closed when the test ends) and its
// decision of q.
func decideOn(t *testing.T, g Graph, q Query, opts ...Option) (*Router, Decision) {
	t.Helper()
	r, err := New(g, opts...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { r.Close() })
	d, err := r.Decide(context.Background(), q)
	if err != nil {
		t.Fatal(err)
	}
	return r, d
}

func TestChainDistsMatchHandProduct(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	q := Query{From: "vent-north", Value: "open", To: "bed-4"}
	r, d := decideOn(t, pathGraph(7), q, WithGainThreshold(-1))
	if d.Mode != ModeChain || len(d.Bridges) != 2 {
		t.Fatalf("want a two-bridge chain, got %v %v", d.Mode, d.Bridges)
	}
	got, err := r.ChainDists(ctx, q, d)
	if err != nil {
		t.Fatal(err)
	}
	m1 := meanRows([]float64{70, 20, 10, 5, 80, 15}, 3)
	m2 := meanRows([]float64{60, 15, 10, 70, 30, 30}, 2)
	m3 := meanRows([]float64{50, 20, 25, 60}, 2)
	x1 := m1[1] // e_open M_1
	x2 := vecMat(x1, m2)
	x3 := vecMat(x2, m3)
	want := []struct {
		ent    string
		values []string
		dist   []float64
	}{
		{"humidity-zone1", []string{"high", "low", "mid"}, x1},
		{"pump-2", []string{"off", "on"}, x2},
	}
	if len(got) != len(want) {
		t.Fatalf("%d distributions, want %d", len(got), len(want))
	}
	for i, w := range want {
		g := got[i]
		if g.Entity != w.ent || len(g.Values) != len(w.values) || len(g.Dist) != len(w.dist) {
			t.Fatalf("step %d: %+v, want %s %v", i, g, w.ent, w.values)
		}
		for j := range w.dist {
			if g.Values[j] != w.values[j] || math.Abs(g.Dist[j]-w.dist[j]) > 1e-12 {
				t.Errorf("step %d value %d: %s %.15f, want %s %.15f", i, j, g.Values[j], g.Dist[j], w.values[j], w.dist[j])
			}
		}
	}
	// One more link gives the decision's own chain estimate.
	for j := range x3 {
		if math.Abs(d.Chain.Estimate[j]-x3[j]) > 1e-12 {
			t.Errorf("x_3[%d] = %.15f, decision's chain estimate %.15f", j, x3[j], d.Chain.Estimate[j])
		}
	}
}

func TestChainDistsErrors(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	q := Query{From: "vent-north", Value: "open", To: "bed-4"}
	r, d := decideOn(t, pathGraph(7), q, WithGainThreshold(-1))
	direct := d
	direct.Chain, direct.Bridges = nil, nil
	if got, err := r.ChainDists(ctx, q, direct); got != nil || err != nil {
		t.Errorf("no chain: %v, %v; want nil, nil", got, err)
	}
	bad := q
	bad.Value = "ajar"
	if _, err := r.ChainDists(ctx, bad, d); !errors.Is(err, ErrUnknownValue) {
		t.Errorf("unknown value: %v", err)
	}
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := r.ChainDists(cctx, q, d); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: %v", err)
	}
	if err := r.Swap(pathGraph(8)); err != nil {
		t.Fatal(err)
	}
	if _, err := r.ChainDists(ctx, q, d); !errors.Is(err, ErrStaleDecision) {
		t.Errorf("after swap: %v, want ErrStaleDecision", err)
	}
	r.Close()
	if _, err := r.ChainDists(ctx, q, d); !errors.Is(err, ErrClosed) {
		t.Errorf("closed: %v", err)
	}
}
