package scorer_test

import (
	"math"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
)

// jointStats builds the tables of n binary entities 1..n from a joint
// distribution (p over the 2^n states, bit i−1 the value of entity i) and
// nctx contexts: each pair gets round(nctx·P(a, b)), each
// marginal round(nctx·P(a)). Every pair is observed together except the
// pairs in hidden.
func jointStats(n int, p func(x []int) float64, nctx float64, hidden ...[2]graphidx.EntityID) *localStats {
	st := newLocalStats()
	x := make([]int, n)
	pair := make(map[[2]int]*[2][2]float64)
	marg := make([][2]float64, n)
	for state := range 1 << n {
		for i := range x {
			x[i] = state >> i & 1
		}
		q := p(x)
		for i := range n {
			marg[i][x[i]] += q
			for j := i + 1; j < n; j++ {
				k := [2]int{i, j}
				if pair[k] == nil {
					pair[k] = new([2][2]float64)
				}
				pair[k][x[i]][x[j]] += q
			}
		}
	}
	for i := range n {
		id := graphidx.EntityID(i + 1)
		st.entity(id, 2)
		st.marg[id] = []uint64{uint64(math.Round(nctx * marg[i][0])), uint64(math.Round(nctx * marg[i][1]))}
	}
next:
	for i := range n {
		for j := i + 1; j < n; j++ {
			a, b := graphidx.EntityID(i+1), graphidx.EntityID(j+1)
			for _, h := range hidden {
				if h == [2]graphidx.EntityID{a, b} || h == [2]graphidx.EntityID{b, a} {
					continue next
				}
			}
			c := pair[[2]int{i, j}]
			rows := [][]uint32{make([]uint32, 2), make([]uint32, 2)}
			for r := range 2 {
				for v := range 2 {
					rows[r][v] = uint32(math.Round(nctx * c[r][v]))
				}
			}
			st.link(a, b, rows)
		}
	}
	return st
}

// bern returns P(x = v) for P(x = 1) = p1.
func bern(p1 float64, v int) float64 {
	if v == 1 {
		return p1
	}
	return 1 - p1
}

// TestInfluenceBoundCommonEffect: s → w ← p → t, with c a child of w, and
// every pair but (s, t) observed together. s and p are independent while
// both move w, so w is a common effect (the PC algorithm's unshielded
// collider, Spirtes, Glymour & Scheines 2000): P(t | s = 1) = P(t) exactly,
// and the bound must not pass the strong change s = 1 makes to w (and to
// its child c) on to t, which lies on p's side of w. Without the collider,
// on the chain s → w → p → t, the same tables' shape must still bound the
// true deviation: 2·TV(P(t | s = 1), P(t))² ≤ Err (up to the α smoothing).
func TestInfluenceBoundCommonEffect(t *testing.T) {
	t.Parallel()
	const s, w, p, tg, c = 1, 2, 3, 4, 5
	// Entities 1..5 are bits 0..4: s, w, p, t, c.
	orW := []float64{0.05, 0.8, 0.8, 0.95} // P(w = 1 | s, p), index 2s + p
	collider := func(x []int) float64 {
		return bern(0.3, x[0]) * bern(0.4, x[2]) * bern(orW[2*x[0]+x[2]], x[1]) *
			bern([]float64{0.1, 0.8}[x[2]], x[3]) * bern([]float64{0.1, 0.9}[x[1]], x[4])
	}
	chain := func(x []int) float64 { // s → w → p → t, w → c
		return bern(0.3, x[0]) * bern([]float64{0.2, 0.85}[x[0]], x[1]) * bern([]float64{0.2, 0.7}[x[1]], x[2]) *
			bern([]float64{0.1, 0.8}[x[2]], x[3]) * bern([]float64{0.1, 0.9}[x[1]], x[4])
	}
	on := mustBayes(t)
	const u = 1
	hide := [2]graphidx.EntityID{s, tg}

	cst := jointStats(5, collider, 20000, hide)
	got, err := on.Direct(nil, cst, s, u, tg)
	if err != nil {
		t.Fatal(err)
	}
	// By hand, the route the bound used to take: s = 1 moves w by
	// TV(π_w, m_w), and w passes that on to t through Θ_(w→t).
	pw1 := (orW[2] * 0.6) + orW[3]*0.4
	mw1 := 0.7*(orW[0]*0.6+orW[1]*0.4) + 0.3*pw1
	ptW := func(wv int) float64 { // P(t = 1 | w = wv)
		num, den := 0.0, 0.0
		for sv := range 2 {
			for pv := range 2 {
				q := bern(0.3, sv) * bern(0.4, pv) * bern(orW[2*sv+pv], wv)
				num += q * []float64{0.1, 0.8}[pv]
				den += q
			}
		}
		return num / den
	}
	route := (pw1 - mw1) * (ptW(1) - ptW(0))
	if 2*route*route < 0.01 {
		t.Fatalf("test world: the route through w gives only %.3g", 2*route*route)
	}
	t.Logf("common effect: Err %.3g; the route through w alone would give 2·TV² = %.3g", got.Err, 2*route*route)
	if got.Err > 1e-3 {
		t.Errorf("s → w ← p → t: the marginal's error %.3g, want ≤ 1e-3 (P(t | s) = P(t), the route through the common effect w is blocked)", got.Err)
	}

	hst := jointStats(5, chain, 20000, hide)
	got, err = on.Direct(nil, hst, s, u, tg)
	if err != nil {
		t.Fatal(err)
	}
	// Exact deviation of P(t = 1 | s = 1) from P(t = 1) on the chain.
	cond, marg := 0.0, 0.0
	for wv := range 2 {
		for pv := range 2 {
			pt := []float64{0.1, 0.8}[pv]
			q1 := bern([]float64{0.2, 0.85}[1], wv) * bern([]float64{0.2, 0.7}[wv], pv)
			cond += q1 * pt
			for sv := range 2 {
				marg += bern(0.3, sv) * bern([]float64{0.2, 0.85}[sv], wv) * bern([]float64{0.2, 0.7}[wv], pv) * pt
			}
		}
	}
	dev := 2 * (cond - marg) * (cond - marg)
	t.Logf("chain: Err %.3g, true squared deviation %.3g", got.Err, dev)
	if got.Err < 0.9*dev { // the bound is exact through a separating w, up to the α smoothing
		t.Errorf("s → w → p → t: the marginal's error %.3g is below 90%% of its true squared deviation %.3g (a chain taken for a common effect)", got.Err, dev)
	}
}
