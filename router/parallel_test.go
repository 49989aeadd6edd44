package router

import (
	"context"
	"encoding/json"
	"math"
	"strings"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// sprinklerGraph is the sprinkler network (Russell & Norvig, AIMA 3rd ed.
// §14.5: P(C) = 0.5, P(S | C) = 0.1 / 0.5, P(R | C) = 0.8 / 0.2, P(W | S,
// R) = 0.99, 0.90, 0.90, 0.0) as exact pair tables of n contexts, with
// Cloudy–WetGrass and Sprinkler–Rain never observed together. It also
// returns the exact P(WetGrass = true | Cloudy = true).
func sprinklerGraph(n float64) (*memGraph, float64) { return sprinklerGraphWitness(n, false) }

// sprinklerGraphWitness is sprinklerGraph, with witness true an entity
// "umbrella" independent of the four and observed with each of them (so
// that the one-bridge chains' separation check has a table to read).
func sprinklerGraphWitness(n float64, witness bool) (*memGraph, float64) {
	var joint [2][2][2][2]float64 // c, s, r, w
	for c := range 2 {
		for s := range 2 {
			for r := range 2 {
				for w := range 2 {
					ps := [2]float64{0.5, 0.1}[c]
					pr := [2]float64{0.2, 0.8}[c]
					pw := [2][2]float64{{0, 0.9}, {0.9, 0.99}}[s][r]
					p := 0.5
					p *= map[bool]float64{true: ps, false: 1 - ps}[s == 1]
					p *= map[bool]float64{true: pr, false: 1 - pr}[r == 1]
					p *= map[bool]float64{true: pw, false: 1 - pw}[w == 1]
					joint[c][s][r][w] = p
				}
			}
		}
	}
	pair := func(i, j int) []uint32 {
		out := make([]uint32, 4)
		var p [4]float64
		for c := range 2 {
			for s := range 2 {
				for r := range 2 {
					for w := range 2 {
						v := [4]int{c, s, r, w}
						p[v[i]*2+v[j]] += joint[c][s][r][w]
					}
				}
			}
		}
		for k := range p {
			out[k] = uint32(math.Round(p[k] * n))
		}
		return out
	}
	b := newMemBuilder(1)
	ids := [4]graphidx.EntityID{
		b.entity("cloudy", "false", "true"),
		b.entity("rain", "false", "true"),
		b.entity("sprinkler", "false", "true"),
		b.entity("wetgrass", "false", "true"),
	}
	if witness {
		um := b.entity("umbrella", "no", "yes")
		for _, id := range ids {
			q := uint32(n / 4) // independent of every variable
			b.pair(id, um, q, q, q, q)
		}
	}
	const c, s, r, w = 0, 2, 1, 3 // positions in ids; joint order is c, s, r, w
	order := [4]int{0, 2, 1, 3}   // ids position → joint axis
	for _, e := range [][2]int{{c, s}, {c, r}, {s, w}, {r, w}} {
		b.pair(ids[e[0]], ids[e[1]], pair(order[e[0]], order[e[1]])...)
	}
	var pcw, pc float64
	for s := range 2 {
		for r := range 2 {
			for w := range 2 {
				pc += joint[1][s][r][w]
				if w == 1 {
					pcw += joint[1][s][r][w]
				}
			}
		}
	}
	return b.build(), pcw / pc
}

// TestParallelDecision: on the sprinkler network's tables (10⁶ contexts),
// P(wetgrass | cloudy = true) has two one-bridge chains, neither of which
// separates. No other table tests the better one, and the four edge tables
// fit either structure (docs/QUALITY.md §4e), so with WithParallelBridges
// the router answers through both bridges with the midpoint of the parallel
// estimate and that chain: nearer the exact 0.7452 than the chain (off by
// 0.063), with an Err of at least the squared half-distance between the
// two; the JSON view and the bridge distributions say so (the plan:
// plan.TestParallelPlan). Without the option, or with a witness for the
// one-bridge chain's separation check, the decision is a one-bridge chain.
func TestParallelDecision(t *testing.T) {
	g, exact := sprinklerGraph(1e6)
	q := Query{From: "cloudy", Value: "true", To: "wetgrass"}
	off, err := New(g, WithParallelBridges(false))
	if err != nil {
		t.Fatal(err)
	}
	d0, err := off.Decide(context.Background(), q)
	if err != nil {
		t.Fatal(err)
	}
	if d0.Chain == nil || d0.Chain.Parallel || len(d0.Chain.Bridges) != 1 {
		t.Fatalf("without the option: chain %+v, want a one-bridge chain", d0.Chain)
	}
	rt, err := New(g, WithParallelBridges(true))
	if err != nil {
		t.Fatal(err)
	}
	d, err := rt.Decide(context.Background(), q)
	if err != nil {
		t.Fatal(err)
	}
	if d.Mode != ModeChain || d.Chain == nil || !d.Chain.Parallel || !d.Chain.Midpoint || len(d.Bridges) != 2 {
		t.Fatalf("with the option: mode %v, chain %+v, want the parallel answer's midpoint", d.Mode, d.Chain)
	}
	got := d.Estimate[1]
	t.Logf("P(wetgrass = true | cloudy = true) = %.4f: parallel %.4f (Err %.3g) through %v; one-bridge chain %.4f through %v",
		exact, got, d.Err, d.Bridges, d0.Chain.Estimate[1], d0.Chain.Bridges)
	chain := d0.Chain.Estimate[1]
	if math.Abs(got-exact) > 0.035 || math.Abs(got-exact) >= math.Abs(chain-exact)/2+0.005 {
		t.Errorf("parallel estimate %.4f, exact %.4f, one-bridge chain %.4f: want well within half the chain's error", got, exact, chain)
	}
	// Binary target: d² = Σ_v (p̂_par − p̂_chain)² = 2·(2·(got − chain))².
	if half := 2 * (got - chain) * (got - chain); d.Err < half {
		t.Errorf("Err %.4g below the squared half-distance %.4g of the two answers", d.Err, half)
	}
	if math.Abs(d0.Chain.Estimate[1]-exact) < 0.05 {
		t.Errorf("one-bridge chain %.4f within 0.05 of %.4f: the fixture no longer needs two bridges", d0.Chain.Estimate[1], exact)
	}
	b, err := json.Marshal(NewView(q, d, rt.ErrorMeasure()))
	if err != nil {
		t.Fatal(err)
	}
	// With a witness table the best chain's check has something to read,
	// so it is not charged the parallel answer's distance: a one-bridge
	// chain again.
	gw, _ := sprinklerGraphWitness(1e6, true)
	rw, err := New(gw, WithParallelBridges(true))
	if err != nil {
		t.Fatal(err)
	}
	dw, err := rw.Decide(context.Background(), q)
	if err != nil {
		t.Fatal(err)
	}
	if dw.Chain == nil || dw.Chain.Parallel {
		t.Errorf("with a witness: chain %+v, want the one-bridge chain", dw.Chain)
	}
	if strings.Count(string(b), `"parallel":true`) != 2 || strings.Count(string(b), `"midpoint":true`) != 1 {
		t.Errorf("JSON view %s: want \"parallel\":true at the top level and in the chain, \"midpoint\":true in the chain", b)
	}
	// Each bridge's distribution is the row the answer reads from cloudy:
	// the direct estimate up to the prior (the hop row's prior is the
	// chain's, scorer.Bayes.HopRow; on these pairs of about 10⁶ contexts
	// the two differ by under 1e-5).
	dists, err := rt.ChainDists(context.Background(), q, d)
	if err != nil {
		t.Fatal(err)
	}
	for i, bd := range dists {
		dd, err := rt.Decide(context.Background(), Query{From: "cloudy", Value: "true", To: d.Bridges[i]})
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(bd.Dist[1]-dd.Direct.Estimate[1]) > 1e-5 {
			t.Errorf("bridge %s: distribution %v, want the direct estimate %v", bd.Entity, bd.Dist, dd.Direct.Estimate)
		}
	}

}
