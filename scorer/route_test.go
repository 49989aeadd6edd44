package scorer_test

import (
	"math"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// TestOneBridgeRoute: a one-bridge chain s → w → t computes the route
// through w exactly, so its missing-signal term γ·(δ − L)₊² is scaled by
// the dependence the influence bound leaves without that route, min(E0,
// κ·2·(B_t − TV_w)², R)/E0, not by the marginal's whole ratio. On the path
// 1 — 2 — 3 — 4 entity 1 has the single neighbour 2, so the chain
// 1 → 2 → 3 can miss nothing: the ratio is 0 (before, it was Var(m̂_3)/E0,
// the marginal's own estimation variance, which is no dependence the chain
// misses: on the Cancer network, whose observed causes reach the far
// targets only through "cancer", that charge made the router answer the
// marginal). The marginal's own error keeps the route through 2, and the
// two-bridge chain 1 → 2 → 3 → 4 keeps the marginal's dependence ratio,
// (E0' − Var(m̂_4))/E0 (only one-bridge chains use the route terms).
func TestOneBridgeRoute(t *testing.T) {
	t.Parallel()
	st := pathWorld()
	const u = 1
	opts := []scorer.Option{scorer.WithBeta(0), scorer.WithMissingSignal(5, 1), scorer.WithSeparation(0)}
	on, err := scorer.NewBayes(opts...)
	if err != nil {
		t.Fatal(err)
	}
	off, err := scorer.NewBayes(append(opts, scorer.WithInfluence(0))...)
	if err != nil {
		t.Fatal(err)
	}
	bias := func(m *scorer.Bayes, bridges []graphidx.EntityID, tg graphidx.EntityID) float64 {
		t.Helper()
		e, err := m.Chain(scorer.NewWorkspace(), st, 1, u, bridges, tg)
		if err != nil {
			t.Fatal(err)
		}
		return e.Err - e.Var
	}
	// E0 = η·(1 − P̂(1 = u))²·(1 − 1/K), P̂ = 501/1002; Var(m̂_3) from (690, 310).
	prior := on.UnseenSpread() * 0.25 * 0.5
	one := []graphidx.EntityID{2}
	full := bias(off, one, 3)
	if !(full > 0) {
		t.Fatalf("missing-signal term %v without the influence bound; the test needs it positive", full)
	}
	if got := bias(on, one, 3) / full; got != 0 {
		t.Errorf("one-bridge chain 1 → 2 → 3: ratio %.6g, want 0", got)
	}
	want := margVar([]uint64{690, 310}) / prior
	d, err := on.Direct(nil, st, 1, u, 3)
	if err != nil {
		t.Fatal(err)
	}
	if d.Err/prior <= want {
		t.Errorf("the marginal's ratio %.4g should keep the route through 2, above the chain's %.4g", d.Err/prior, want)
	}
	two := []graphidx.EntityID{2, 3}
	d4, err := on.Direct(nil, st, 1, u, 4)
	if err != nil {
		t.Fatal(err)
	}
	if got, want := bias(on, two, 4)/bias(off, two, 4), (d4.Err-margVar([]uint64{600, 400}))/prior; math.Abs(got-want) > 1e-9 {
		t.Errorf("two-bridge chain 1 → 2 → 3 → 4: ratio %.6g, want the marginal's %.6g", got, want)
	}
}
