package scorer_test

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// localStats adds marginals and neighbour lists to memStats, as an index
// has them: what the influence bound reads.
type localStats struct {
	*memStats
	marg map[graphidx.EntityID][]uint64
	adj  map[graphidx.EntityID][]graphidx.EntityID
}

func newLocalStats() *localStats {
	return &localStats{memStats: newMemStats(), marg: map[graphidx.EntityID][]uint64{}, adj: map[graphidx.EntityID][]graphidx.EntityID{}}
}

// link stores the table of (a, b) and records each as the other's
// neighbour (in insertion order, which serves as the support ranking).
func (l *localStats) link(a, b graphidx.EntityID, rows [][]uint32) {
	l.pair(a, b, rows)
	l.adj[a] = append(l.adj[a], b)
	l.adj[b] = append(l.adj[b], a)
}

func (l *localStats) Marginal(id graphidx.EntityID) []uint64 { return l.marg[id] }
func (l *localStats) Neighbors(id graphidx.EntityID) []graphidx.EntityID {
	return slices.Clone(l.adj[id])
}
func (l *localStats) RankedNeighbors(id graphidx.EntityID) []graphidx.EntityID { return l.adj[id] }

// tv2 is the total-variation distance of a binary distribution deviation d
// (its positive part).
func tv2(d0, d1 float64) float64 { return max(d0, 0) + max(d1, 0) }

// pathWorld returns the path 1 — 2 — 3 — 4 of binary entities of
// TestInfluenceBound: (1, 2) barely dependent, (2, 3) and (3, 4) more.
func pathWorld() *localStats {
	st := newLocalStats()
	for id := graphidx.EntityID(1); id <= 4; id++ {
		st.entity(id, 2)
	}
	st.link(1, 2, [][]uint32{{400, 100}, {380, 120}})
	st.link(2, 3, [][]uint32{{600, 180}, {90, 130}})
	st.link(3, 4, [][]uint32{{500, 190}, {100, 210}})
	st.marg[1] = []uint64{500, 500}
	st.marg[2] = []uint64{780, 220}
	st.marg[3] = []uint64{690, 310}
	st.marg[4] = []uint64{600, 400}
	return st
}

// TestInfluenceBound: on the path s — w — z — t of binary entities, with
// (s, t) never observed together, the error of the direct estimate of t
// given s = u is min(E0, 2·B² + Var(m̂_t)), E0 the fitted prior error, B the
// two-hop influence TV((π_w − m_w)ᵀ Θ_(w→z)) computed here by hand from the
// tables (α = 1); a chain's missing-signal term shrinks by 2·B²/E0 (the
// dependence it can miss, without the marginal's variance).
// The bound does not apply with κ = 0, to a pair observed together, or when
// s has more neighbours than InfluenceFirst (the bound could not read them
// all).
func TestInfluenceBound(t *testing.T) {
	t.Parallel()
	const s, w, z, tg = 1, 2, 3, 4
	st := pathWorld()
	const u = 1
	// By hand: π_w = row u of (s, w) smoothed, m_w the smoothed marginal.
	pi := []float64{381.0 / 502, 121.0 / 502}
	mw := []float64{781.0 / 1002, 221.0 / 1002}
	dev := []float64{pi[0] - mw[0], pi[1] - mw[1]}
	theta := [][]float64{{601.0 / 782, 181.0 / 782}, {91.0 / 222, 131.0 / 222}}
	d0 := dev[0]*theta[0][0] + dev[1]*theta[1][0]
	d1 := dev[0]*theta[0][1] + dev[1]*theta[1][1]
	b := min(tv2(d0, d1), tv2(dev[0], dev[1]))
	share := 501.0 / 1002
	prior := scorer.DefaultUnseenSpread * (1 - share) * (1 - share) * 0.5
	mt := []float64{601.0 / 1002, 401.0 / 1002} // the target's smoothed marginal
	want := min(prior, 2*b*b+(1-mt[0]*mt[0]-mt[1]*mt[1])/1003)
	if want >= prior/10 {
		t.Fatalf("test world: bound %.3g does not bind against E0 %.3g", want, prior)
	}

	on := mustBayes(t)
	off := mustBayes(t, scorer.WithInfluence(0))
	got, err := on.Direct(nil, st, s, u, tg)
	if err != nil {
		t.Fatal(err)
	}
	if !near(got.Err, want, 1e-12) {
		t.Errorf("bounded error %.15g, want %.15g (E0 %.6g, B %.6g)", got.Err, want, prior, b)
	}
	plain, err := off.Direct(nil, st, s, u, tg)
	if err != nil {
		t.Fatal(err)
	}
	if !near(plain.Err, prior, 1e-12) {
		t.Errorf("κ = 0: error %.15g, want E0 %.15g", plain.Err, prior)
	}
	if !slices.Equal(got.Dist, plain.Dist) {
		t.Errorf("the bound changed the estimate: %v against %v", got.Dist, plain.Dist)
	}

	// A chain's missing-signal term shrinks by want/prior; the rest of its
	// error is unchanged. Compare with the term off to isolate it.
	bridges := []graphidx.EntityID{w, z}
	var terms [2]float64
	for i, m := range []*scorer.Bayes{on, off} {
		c0, err := mustBayesFrom(t, m, 0).Chain(nil, st, s, u, bridges, tg)
		if err != nil {
			t.Fatal(err)
		}
		c1, err := m.Chain(nil, st, s, u, bridges, tg)
		if err != nil {
			t.Fatal(err)
		}
		terms[i] = c1.Err - c0.Err
	}
	if terms[1] <= 0 {
		t.Fatalf("test world: the weak chain pays no missing-signal term")
	}
	// The dependence a chain can miss is 2·B², without the marginal's own
	// variance (which the chain does not answer with).
	if r := terms[0] / terms[1]; !near(r, 2*b*b/prior, 1e-9) {
		t.Errorf("missing-signal term scaled by %.9g, want 2·B²/E0 = %.9g", r, 2*b*b/prior)
	}
	// A workspace reused across queries (as the router does) gives the
	// same answers as a fresh one.
	ws := scorer.NewWorkspace()
	for range 2 {
		for _, tt := range []graphidx.EntityID{tg, z} {
			d, err := on.Direct(ws, st, s, u, tt)
			if err != nil {
				t.Fatal(err)
			}
			d0, _ := on.Direct(nil, st, s, u, tt)
			if d.Err != d0.Err {
				t.Errorf("reused workspace: Err %v, fresh %v", d.Err, d0.Err)
			}
		}
		c, err := on.Chain(ws, st, s, u, bridges, tg)
		if err != nil {
			t.Fatal(err)
		}
		c0, _ := on.Chain(nil, st, s, u, bridges, tg)
		if c.Err != c0.Err {
			t.Errorf("reused workspace: chain Err %v, fresh %v", c.Err, c0.Err)
		}
	}

	// A pair observed together keeps its error: add (s, t) to a copy.
	seen := pathWorld()
	seen.link(s, tg, [][]uint32{{1, 0}, {0, 1}})
	a, _ := on.Direct(nil, seen, s, u, tg)
	bOff, _ := off.Direct(nil, seen, s, u, tg)
	if a.Err != bOff.Err {
		t.Errorf("observed pair: Err %v with the bound, %v without", a.Err, bOff.Err)
	}

	// More neighbours than InfluenceFirst: no bound.
	hub := pathWorld()
	for i := range scorer.InfluenceFirst {
		id := graphidx.EntityID(10 + i)
		hub.entity(id, 2)
		hub.marg[id] = []uint64{500, 500}
		hub.link(s, id, [][]uint32{{250, 250}, {250, 250}})
	}
	h, err := on.Direct(nil, hub, s, u, tg)
	if err != nil {
		t.Fatal(err)
	}
	if !near(h.Err, prior, 1e-12) || math.IsNaN(h.Err) {
		t.Errorf("hub with %d neighbours: Err %.15g, want E0 %.15g", len(hub.adj[s]), h.Err, prior)
	}
}

// TestInfluenceBoundTarget: when the observed entity's neighbour w was
// observed with the target t, the bound is the deviation w passes on to t
// itself, TV((π_w − m_w)ᵀ Θ_(w→t)), even when w moves another neighbour z
// more (the two-hop bound through z alone would be larger).
func TestInfluenceBoundTarget(t *testing.T) {
	t.Parallel()
	const s, w, z, tg = 1, 2, 3, 4
	st := newLocalStats()
	for id := graphidx.EntityID(1); id <= 4; id++ {
		st.entity(id, 2)
	}
	sw := [][]uint32{{400, 100}, {300, 200}}
	st.link(s, w, sw)
	st.link(w, z, [][]uint32{{690, 10}, {10, 290}})    // w → z strong
	st.link(w, tg, [][]uint32{{400, 300}, {160, 140}}) // w → t weak
	st.marg[s] = []uint64{500, 500}
	st.marg[w] = []uint64{700, 300}
	st.marg[z] = []uint64{700, 300}
	st.marg[tg] = []uint64{560, 440}
	const u = 1
	pi := []float64{301.0 / 502, 201.0 / 502}
	mw := []float64{701.0 / 1002, 301.0 / 1002}
	dev := []float64{pi[0] - mw[0], pi[1] - mw[1]}
	through := func(rows [][]float64) float64 {
		d0 := dev[0]*rows[0][0] + dev[1]*rows[1][0]
		d1 := dev[0]*rows[0][1] + dev[1]*rows[1][1]
		return tv2(d0, d1)
	}
	toT := through([][]float64{{401.0 / 702, 301.0 / 702}, {161.0 / 302, 141.0 / 302}})
	toZ := through([][]float64{{691.0 / 702, 11.0 / 702}, {11.0 / 302, 291.0 / 302}})
	if !(toT < toZ/4) {
		t.Fatalf("test world: deviation at t %.4g not well below the one at z %.4g", toT, toZ)
	}
	share := 501.0 / 1002
	prior := scorer.DefaultUnseenSpread * (1 - share) * (1 - share) * 0.5
	mt := []float64{561.0 / 1002, 441.0 / 1002}
	want := min(prior, 2*toT*toT+(1-mt[0]*mt[0]-mt[1]*mt[1])/1003)
	got, err := mustBayes(t).Direct(nil, st, s, u, tg)
	if err != nil {
		t.Fatal(err)
	}
	if !near(got.Err, want, 1e-12) {
		t.Errorf("bounded error %.15g, want %.15g (through z alone it would be %.6g)", got.Err, want, 2*toZ*toZ)
	}
}

// mustBayesFrom returns m's configuration with γ set (the missing-signal
// term on or off, everything else equal).
func mustBayesFrom(t *testing.T, m *scorer.Bayes, gamma float64) *scorer.Bayes {
	t.Helper()
	c := m.Config()
	c.MissingGamma = gamma
	b, err := scorer.NewBayesFrom(c)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// BenchmarkDirectUnseen measures Bayes.Direct for pairs never observed
// together on a real index (1000 binary entities on a ring, each observed
// with the 2 nearest on either side: 4 neighbours), with the influence
// bound on (κ = 1) against the baseline κ = 0 in the same run: the bound's
// added cost per direct estimate (at most 16 pair look-ups here).
func BenchmarkDirectUnseen(b *testing.B) {
	const n = 1000
	rng := rand.New(rand.NewPCG(7, 7))
	src := &tableSource{}
	for i := range n {
		src.ents = append(src.ents, graphidx.EntityRecord{Name: fmt.Sprintf("e%04d", i), Values: []string{"off", "on"}, Marginal: make([]uint64, 2)})
	}
	for a := range n {
		for d := 1; d <= 2; d++ {
			c := (a + d) % n
			lo, hi := min(a, c), max(a, c)
			flat := []uint32{uint32(200 + rng.IntN(100)), uint32(20 + rng.IntN(50)), uint32(20 + rng.IntN(50)), uint32(200 + rng.IntN(100))}
			for r := range 2 {
				for v := range 2 {
					src.ents[lo].Marginal[r] += uint64(flat[r*2+v])
					src.ents[hi].Marginal[v] += uint64(flat[r*2+v])
				}
			}
			src.pairs = append(src.pairs, graphidx.PairRecord{A: graphidx.EntityID(lo), B: graphidx.EntityID(hi), Counts: flat})
		}
	}
	slices.SortFunc(src.pairs, func(x, y graphidx.PairRecord) int {
		if x.A != y.A {
			return int(x.A) - int(y.A)
		}
		return int(x.B) - int(y.B)
	})
	ix := openIndex(b, src)
	for _, kappa := range []float64{0, 1} {
		b.Run(fmt.Sprintf("kappa=%g", kappa), func(b *testing.B) {
			model := mustBayes(b, scorer.WithInfluence(kappa))
			ws := scorer.NewWorkspace()
			ws.BorrowDist(true)
			var est scorer.Estimate
			var err error
			i := 0
			b.ReportAllocs()
			for b.Loop() {
				s := graphidx.EntityID(i % n)
				est, err = model.Direct(ws, ix, s, i&1, graphidx.EntityID((i+10)%n))
				i++
			}
			if err != nil {
				b.Fatal(err)
			}
			if est.Support != 0 || len(est.Dist) != 2 || !(est.Err > 0) {
				b.Fatalf("unexpected estimate %+v for a pair never observed together", est)
			}
		})
	}
}

// wrongShape is a localStats whose table of (a, b) claims a different
// shape than the entities have (a broken Stats implementation).
type wrongShape struct {
	*localStats
	a, b graphidx.EntityID
}

func (w wrongShape) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	ps, ok := w.localStats.Pair(a, b)
	if ok && a == w.a && b == w.b {
		ps.KB++
	}
	return ps, ok
}

// TestInfluenceBoundBadStats: a neighbour table read only by the influence
// bound whose shape does not match its entities is reported
// (ErrBadStats), not skipped.
func TestInfluenceBoundBadStats(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name string
		a, b graphidx.EntityID
	}{{"first hop", 1, 2}, {"second hop", 2, 3}} {
		st := wrongShape{pathWorld(), c.a, c.b}
		_, err := mustBayes(t).Direct(nil, st, 1, 1, 4)
		if !errors.Is(err, scorer.ErrBadStats) {
			t.Errorf("%s: Direct error %v, want ErrBadStats", c.name, err)
		}
	}
}

// TestInfluenceUnseenRoute: the one-bridge route terms B_t bound the
// influence only when t is reached through a neighbour observed with it.
// Here s = 1 has two neighbours: 2, which s = u moves strongly and which
// reaches t = 4 only through 3 (never observed with 4), and 5, observed
// with 4 but independent of both. B_t sums only the route through 5 (about
// 0), so taken as a bound it put the marginal's error at its own variance
// (2.5e-4) although the valid chain 1 → 2 → 3 → 4 moves P(4) by 0.26. The
// bound must fall back to B, and the marginal's error must cover the
// chain's squared distance from the marginal (capped by the prior E0). In
// ASIA (Lauritzen & Spiegelhalter 1988) with hopwise eval's held-out pairs,
// P(smoke | xray = yes) was answered by the marginal that way (realised
// squared error 0.07; the valid chain through either and lung realises
// 6e-5).
func TestInfluenceUnseenRoute(t *testing.T) {
	t.Parallel()
	strong := [][]uint32{{450, 50}, {50, 450}}
	flat := [][]uint32{{250, 250}, {250, 250}}
	// 5 unmoved by s; then 5 moved by s but independent of t (in ASIA,
	// smoke = yes moves bronc, which was observed with xray but carries
	// nothing to it; the route to xray runs through lung and either).
	for _, s5 := range [][][]uint32{flat, strong} {
		testUnseenRoute(t, s5, strong, flat)
	}
}

func testUnseenRoute(t *testing.T, s5, strong, flat [][]uint32) {
	t.Helper()
	st := newLocalStats()
	for id := graphidx.EntityID(1); id <= 5; id++ {
		st.entity(id, 2)
		st.marg[id] = []uint64{500, 500}
	}
	st.link(1, 2, strong)
	st.link(1, 5, s5)
	st.link(2, 3, strong)
	st.link(3, 4, strong)
	st.link(5, 4, flat)
	const u = 1
	m, err := scorer.NewBayes()
	if err != nil {
		t.Fatal(err)
	}
	d, err := m.Direct(nil, st, 1, u, 4)
	if err != nil {
		t.Fatal(err)
	}
	c, err := m.Chain(nil, st, 1, u, []graphidx.EntityID{2, 3}, 4)
	if err != nil {
		t.Fatal(err)
	}
	dev := 0.0
	for v, p := range c.Dist {
		dev += (p - d.Dist[v]) * (p - d.Dist[v])
	}
	prior := m.UnseenSpread() * 0.25 * 0.5 // E0 = η·(1 − P̂(1 = u))²·(1 − 1/K)
	want := min(prior, dev)
	t.Logf("marginal's error %.4g; the chain's squared distance from the marginal %.4g, E0 %.4g", d.Err, dev, prior)
	if d.Err < 0.99*want {
		t.Errorf("marginal's predicted error %.4g below min(E0, chain's squared distance) %.4g: the route through 2 and 3 was left out", d.Err, want)
	}
}

// TestPrevSideWitness: s → b ← n is a common effect (b is likely when s
// or n is), w is a child of s, and s and n were never observed together,
// so the one-bridge chain s → b → n invents a dependence: it answers
// P(n | s = 1) = 0.63 where the truth is the marginal 0.5. b's own
// neighbours offer no witness, but w does: the chain claims that w = 1
// raises P(n), while the table (w, n) shows none. The chain must be
// charged at least half its squared bias (before the prev-side witnesses
// it was charged nothing, and its error was its variance). The same
// network with b a mediator (s → b → n, so the chain is valid) must be
// charged less than 1e-4.
func TestPrevSideWitness(t *testing.T) {
	t.Parallel()
	const N = 20000
	build := func(pn func(s, b int) float64, pb func(s, n int) float64, collider bool) *localStats {
		// Joint over (s, b, n, w): s ~ Bern(0.5); w | s; collider: n ~
		// Bern(0.5), b | s, n; mediator: b | s (pb(s, 0)), n | b (pn).
		var joint [2][2][2][2]float64
		for s := range 2 {
			for w := range 2 {
				pw := 0.1
				if s == w {
					pw = 0.9
				}
				for b := range 2 {
					for n := range 2 {
						var p float64
						if collider {
							q := pb(s, n)
							if b == 0 {
								q = 1 - q
							}
							p = 0.5 * 0.5 * q
						} else {
							q := pb(s, 0)
							if b == 0 {
								q = 1 - q
							}
							r := pn(s, b)
							if n == 0 {
								r = 1 - r
							}
							p = 0.5 * q * r
						}
						joint[s][b][n][w] = p * pw
					}
				}
			}
		}
		table := func(f func(s, b, n, w int) (int, int)) [][]uint32 {
			var c [2][2]float64
			for s := range 2 {
				for b := range 2 {
					for n := range 2 {
						for w := range 2 {
							i, j := f(s, b, n, w)
							c[i][j] += joint[s][b][n][w]
						}
					}
				}
			}
			return [][]uint32{{uint32(N*c[0][0] + 0.5), uint32(N*c[0][1] + 0.5)}, {uint32(N*c[1][0] + 0.5), uint32(N*c[1][1] + 0.5)}}
		}
		st := newLocalStats()
		for id := graphidx.EntityID(1); id <= 4; id++ {
			st.entity(id, 2)
		}
		// 1 = s, 2 = b, 3 = n, 4 = w.
		st.link(1, 2, table(func(s, b, n, w int) (int, int) { return s, b }))
		st.link(2, 3, table(func(s, b, n, w int) (int, int) { return b, n }))
		st.link(1, 4, table(func(s, b, n, w int) (int, int) { return s, w }))
		st.link(4, 3, table(func(s, b, n, w int) (int, int) { return w, n }))
		for id, f := range map[graphidx.EntityID]func(s, b, n, w int) int{
			1: func(s, b, n, w int) int { return s }, 2: func(s, b, n, w int) int { return b },
			3: func(s, b, n, w int) int { return n }, 4: func(s, b, n, w int) int { return w },
		} {
			var m [2]float64
			for s := range 2 {
				for b := range 2 {
					for n := range 2 {
						for w := range 2 {
							m[f(s, b, n, w)] += joint[s][b][n][w]
						}
					}
				}
			}
			st.marg[id] = []uint64{uint64(N*m[0] + 0.5), uint64(N*m[1] + 0.5)}
		}
		return st
	}
	orGate := func(s, n int) float64 {
		if s == 1 || n == 1 {
			return 0.9
		}
		return 0.05
	}
	m, err := scorer.NewBayes()
	if err != nil {
		t.Fatal(err)
	}
	bias := func(st *localStats) (float64, []float64) {
		t.Helper()
		e, err := m.Chain(scorer.NewWorkspace(), st, 1, 1, []graphidx.EntityID{2}, 3)
		if err != nil {
			t.Fatal(err)
		}
		return e.Err - e.Var, e.Dist
	}
	got, dist := bias(build(nil, orGate, true))
	want := (dist[0]-0.5)*(dist[0]-0.5) + (dist[1]-0.5)*(dist[1]-0.5) // the truth is P(n) = (0.5, 0.5)
	t.Logf("common effect: chain answers %.3f, squared bias %.4g, charged %.4g", dist[1], want, got)
	if got < 0.5*want {
		t.Errorf("chain through the common effect charged %.4g, want at least half its squared bias %.4g", got, want)
	}
	med := func(s, b int) float64 { return []float64{0.2, 0.8}[b] }
	path := func(s, n int) float64 { return []float64{0.3, 0.7}[s] }
	got, dist = bias(build(med, path, false))
	t.Logf("mediator: chain answers %.3f, charged %.4g", dist[1], got)
	if got > 1e-4 {
		t.Errorf("valid chain through a mediator charged %.4g, want < 1e-4", got)
	}
}
