package gw_test

import (
	"context"
	"testing"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/examples/internal/ghtest"
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// TestSimModel checks the simulated model's two properties against the
// greenhouse's exact answers: its direct answers on pairs never seen together
// are much worse than on well-supported pairs, and following the router's
// chain step by step repairs most of that.
func TestSimModel(t *testing.T) {
	t.Parallel()
	path, err := ghtest.Build(t.TempDir(), "index.hwx", 1, 20000, 1)
	if err != nil {
		t.Fatal(err)
	}
	idx, err := graphidx.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer idx.Close()
	sim, err := gw.NewSim(idx, gw.SimOptions{Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	idx2, err := graphidx.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	rt, err := router.New(idx2)
	if err != nil {
		t.Fatal(err)
	}
	defer rt.Close()
	w, err := ghtest.World(1)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	mse := func(pairs [][2]int, chain bool) (float64, int) {
		var sum float64
		n := 0
		for _, p := range pairs {
			for u := range w.Card(p[0]) {
				truth, err := w.TrueConditional(p[0], u, p[1])
				if err != nil {
					t.Fatal(err)
				}
				q := router.Query{From: w.Name(p[0]), Value: w.Labels(p[0])[u], To: w.Name(p[1])}
				req := gw.Request{Query: q, Mode: router.ModeDirect}
				if chain {
					d, err := rt.Decide(ctx, q)
					if err != nil {
						t.Fatal(err)
					}
					if d.Chain == nil {
						continue
					}
					req.Mode, req.Bridges = router.ModeChain, d.Chain.Bridges
				}
				a, err := sim.Answer(ctx, req)
				if err != nil {
					t.Fatal(err)
				}
				if chain && len(a.Steps) != len(req.Bridges) {
					t.Fatalf("%d steps for bridges %v", len(a.Steps), req.Bridges)
				}
				for v := range truth {
					e := a.Dist[v] - truth[v]
					sum += e * e / float64(len(truth))
				}
				n++
			}
		}
		return sum / float64(max(n, 1)), n
	}
	heldDirect, n1 := mse(w.HeldOut(), false)
	heldChain, n2 := mse(w.HeldOut(), true)
	supDirect, n3 := mse(w.Supported(), false)
	t.Logf("sim MSE: held-out direct %.4f (%d), held-out chained %.4f (%d), supported direct %.5f (%d)", heldDirect, n1, heldChain, n2, supDirect, n3)
	if n2 < n1/2 {
		t.Errorf("chains for only %d of %d held-out queries", n2, n1)
	}
	if !(supDirect*5 < heldDirect) {
		t.Errorf("direct answers barely degrade without support: supported %.5f vs held-out %.4f", supDirect, heldDirect)
	}
	if !(heldChain < heldDirect/2) {
		t.Errorf("chained %.4f does not repair direct %.4f on held-out pairs", heldChain, heldDirect)
	}

	// Equal requests get equal answers; the key changes the noise.
	q := gw.Request{Query: router.Query{From: "zone-1/vent-a", Value: "open", To: "bed-1/yield", Key: "k1"}}
	a1, _ := sim.Answer(ctx, q)
	a2, _ := sim.Answer(ctx, q)
	q.Query.Key = "k2"
	a3, _ := sim.Answer(ctx, q)
	if a1.Dist[0] != a2.Dist[0] || a1.Dist[0] == a3.Dist[0] {
		t.Errorf("noise stream: %v %v %v", a1.Dist, a2.Dist, a3.Dist)
	}
	if a1.InputTokens != 120 || a1.OutputTokens != 16 {
		t.Errorf("direct usage %d/%d, want the defaults 120/16", a1.InputTokens, a1.OutputTokens)
	}
	if _, err := sim.Answer(ctx, gw.Request{Query: router.Query{From: "nope", Value: "x", To: "bed-1/yield"}}); err == nil {
		t.Error("unknown entity answered")
	}
	if _, err := gw.NewSim(idx, gw.SimOptions{Sigma: -1}); err == nil {
		t.Error("negative sigma accepted")
	}
}
