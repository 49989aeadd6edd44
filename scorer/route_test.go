package scorer_test

import (
	"errors"
	"math"
	"slices"
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

// TestProjectReference: on the path 1 — 2 — 3 — 4 the influence bound puts
// P(4 | 1 = u) within √(2·B²) of the marginal (TestInfluenceBound), so the
// ball of ProjectReference has radius ρ = √(E0' − Var(m̂_4)) + √Var(m̂_4),
// E0' the direct estimate's error. A reference outside it moves onto its
// sphere along the segment to m̂ (and stays a distribution); one inside
// stays; a reference of the wrong length or with a value outside [0, 1],
// or an observed value out of range, is an error; κ = 0 turns it off.
// (The bound excess a chain outside the ball pays is checked on ASIA:
// internal/eval TestCommonEffectBound.)
func TestProjectReference(t *testing.T) {
	t.Parallel()
	st := pathWorld()
	const u = 1
	b, err := scorer.NewBayes()
	if err != nil {
		t.Fatal(err)
	}
	d, err := b.Direct(nil, st, 1, u, 4)
	if err != nil {
		t.Fatal(err)
	}
	mv := margVar([]uint64{600, 400})
	rho := math.Sqrt(d.Err-mv) + math.Sqrt(mv)
	m := smoothed([]uint64{600, 400})
	dist := func(p []float64) float64 {
		return math.Hypot(p[0]-m[0], p[1]-m[1])
	}
	far := []float64{0.05, 0.95}
	if dist(far) <= rho {
		t.Fatalf("test world: reference %v within the ball (ρ %.4g)", far, rho)
	}
	got := slices.Clone(far)
	if err := b.ProjectReference(scorer.NewWorkspace(), st, 1, u, 4, got); err != nil {
		t.Fatal(err)
	}
	if math.Abs(dist(got)-rho) > 1e-12 || math.Abs(got[0]+got[1]-1) > 1e-12 {
		t.Errorf("projected %v: distance %.6g from the marginal, want ρ = %.6g; sum %.15g", got, dist(got), rho, got[0]+got[1])
	}
	// On the segment from m̂ to the reference.
	if f := (got[0] - m[0]) / (far[0] - m[0]); math.Abs((got[1]-m[1])-f*(far[1]-m[1])) > 1e-12 || f <= 0 || f >= 1 {
		t.Errorf("projected %v is not on the segment from %v to %v", got, m, far)
	}
	near := []float64{m[0] + 0.5*rho/math.Sqrt2, m[1] - 0.5*rho/math.Sqrt2}
	in := slices.Clone(near)
	if err := b.ProjectReference(nil, st, 1, u, 4, in); err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(in, near) {
		t.Errorf("a reference inside the ball moved: %v → %v", near, in)
	}
	if err := b.ProjectReference(nil, st, 1, u, 4, []float64{1}); !errors.Is(err, scorer.ErrBadStats) {
		t.Errorf("reference of 1 value for a binary target: err %v, want ErrBadStats", err)
	}
	// Rounding of a chain's products: accepted and clamped.
	round := []float64{math.Nextafter(0, -1), math.Nextafter(1, 2)}
	if err := b.ProjectReference(nil, st, 1, u, 4, round); err != nil {
		t.Errorf("reference %v (rounding): %v", round, err)
	} else if round[0] < 0 || round[1] > 1 {
		t.Errorf("reference with rounding not clamped to [0, 1]: %v", round)
	}
	for _, bad := range [][]float64{{math.NaN(), 0.5}, {-0.1, 1.1}, {-1e-9, 1 + 1e-9}} {
		if err := b.ProjectReference(nil, st, 1, u, 4, bad); !errors.Is(err, scorer.ErrBadEstimate) {
			t.Errorf("reference %v: err %v, want ErrBadEstimate", bad, err)
		}
	}
	if err := b.ProjectReference(nil, st, 1, 7, 4, slices.Clone(far)); !errors.Is(err, scorer.ErrValueRange) {
		t.Errorf("observed value 7 of a binary entity: err %v, want ErrValueRange", err)
	}
	// κ = 0 turns the bound, and so the projection, off.
	off, err := scorer.NewBayes(scorer.WithInfluence(0))
	if err != nil {
		t.Fatal(err)
	}
	same := slices.Clone(far)
	if err := off.ProjectReference(nil, st, 1, u, 4, same); err != nil || !slices.Equal(same, far) {
		t.Errorf("κ = 0: reference %v → %v (err %v), want unchanged", far, same, err)
	}
}
