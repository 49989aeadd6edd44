package scorer_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// additiveNet is a network s → b1, s → b2, (b1, b2) → t whose table of t is
// additive in b1 and b2, f(a, c) = (q1[a] + q2[c])/2, with K = 3, 3, 2, 3
// values: there the parallel estimate's assumptions hold exactly, so it
// must equal the exact conditional P(t | s = u) = Σ_ac P(a | u) P(c | u)
// f(a, c). The pair tables are the exact joint marginals × n contexts.
func additiveNet(seed uint64, n float64, withBridges bool) (st *memStats, exact [][]float64) {
	return netWith(seed, n, withBridges, nil)
}

// netWith is additiveNet with t's table f(a, c) given (f[a][c][v]; nil for
// the additive one).
func netWith(seed uint64, n float64, withBridges bool, fTab [][][]float64) (st *memStats, exact [][]float64) {
	rng := rand.New(rand.NewPCG(seed, 3))
	dist := func(k int) []float64 {
		p := make([]float64, k)
		s := 0.0
		for i := range p {
			p[i] = 0.1 + rng.Float64()
			s += p[i]
		}
		for i := range p {
			p[i] /= s
		}
		return p
	}
	const ks, k1, k2, kt = 3, 3, 2, 3
	ps := dist(ks)
	var pb1, pb2 [ks][]float64
	for u := range ks {
		pb1[u], pb2[u] = dist(k1), dist(k2)
	}
	var q1 [k1][]float64
	var q2 [k2][]float64
	for a := range k1 {
		q1[a] = dist(kt)
	}
	for c := range k2 {
		q2[c] = dist(kt)
	}
	var joint [ks][k1][k2][kt]float64
	exact = make([][]float64, ks)
	for u := range ks {
		exact[u] = make([]float64, kt)
		for a := range k1 {
			for c := range k2 {
				for v := range kt {
					f := (q1[a][v] + q2[c][v]) / 2
					if fTab != nil {
						f = fTab[a][c][v]
					}
					joint[u][a][c][v] = ps[u] * pb1[u][a] * pb2[u][c] * f
					exact[u][v] += pb1[u][a] * pb2[u][c] * f
				}
			}
		}
	}
	marg := func(x, y int) [][]uint32 { // axes 0 s, 1 b1, 2 b2, 3 t
		kk := [4]int{ks, k1, k2, kt}
		out := make([][]uint32, kk[x])
		acc := make([][]float64, kk[x])
		for i := range out {
			out[i] = make([]uint32, kk[y])
			acc[i] = make([]float64, kk[y])
		}
		for u := range ks {
			for a := range k1 {
				for c := range k2 {
					for v := range kt {
						i := [4]int{u, a, c, v}
						acc[i[x]][i[y]] += joint[u][a][c][v]
					}
				}
			}
		}
		for i := range acc {
			for j := range acc[i] {
				out[i][j] = uint32(math.Round(acc[i][j] * n))
			}
		}
		return out
	}
	st = newMemStats().entity(0, ks).entity(1, k1).entity(2, k2).entity(3, kt)
	st.pair(0, 1, marg(0, 1)).pair(0, 2, marg(0, 2)).pair(1, 3, marg(1, 3)).pair(2, 3, marg(2, 3))
	if withBridges {
		st.pair(1, 2, marg(1, 2))
	}
	return st, exact
}

// TestParallelExactAdditive: on additive networks with multi-valued
// entities (additiveNet, 10⁹ contexts, five seeds) the parallel estimate
// equals the exact conditional (variable elimination by hand) within 1e-5
// when the bridges' own table was observed; without it, the average of the
// two covariance assumptions is within its charged half-difference H of
// the exact answer (the assumption through s is the exact one here), and
// the estimate is a distribution.
func TestParallelExactAdditive(t *testing.T) {
	m, err := scorer.NewBayes()
	if err != nil {
		t.Fatal(err)
	}
	for seed := range uint64(5) {
		for _, withB := range []bool{true, false} {
			st, exact := additiveNet(seed, 1e9, withB)
			for u := range exact {
				est, ok, err := m.Parallel(nil, st, 0, u, 1, 2, 3)
				if err != nil || !ok {
					t.Fatalf("seed %d: ok %v, %v", seed, ok, err)
				}
				d2, sum := 0.0, 0.0
				for v, p := range est.Dist {
					d := p - exact[u][v]
					d2 += d * d
					sum += p
					if p < 0 {
						t.Errorf("seed %d, u %d: negative probability %v", seed, u, est.Dist)
					}
				}
				if math.Abs(sum-1) > 1e-12 {
					t.Errorf("seed %d, u %d: estimate sums to %v", seed, u, sum)
				}
				hub := est.Err - est.Var // I + H (+ E, 0 here without marginals)
				if withB && math.Sqrt(d2) > 1e-5 {
					t.Errorf("seed %d, u %d, bridges' table: estimate %v, exact %v", seed, u, est.Dist, exact[u])
				}
				if !withB && d2 > hub+1e-10 {
					t.Errorf("seed %d, u %d, no bridges' table: squared distance %.3g from the exact answer above the bias allowance %.3g", seed, u, d2, hub)
				}
			}
		}
	}
}

// TestParallelThroughS: without the bridges' table, the covariance taken
// through s (b1 ⊥ b2 | s, which holds in additiveNet) gives the exact
// answer within 1e-5, and the one through t does not (it is charged).
func TestParallelThroughS(t *testing.T) {
	m, err := scorer.NewBayes()
	if err != nil {
		t.Fatal(err)
	}
	worstT := 0.0
	for seed := range uint64(5) {
		st, exact := additiveNet(seed, 1e9, false)
		for hub := 1; hub <= 2; hub++ {
			restore := scorer.SetParallelHub(hub)
			for u := range exact {
				est, ok, err := m.Parallel(nil, st, 0, u, 1, 2, 3)
				if err != nil || !ok {
					restore()
					t.Fatalf("seed %d: ok %v, %v", seed, ok, err)
				}
				d := 0.0
				for v, p := range est.Dist {
					d = max(d, math.Abs(p-exact[u][v]))
				}
				if hub == 1 && d > 1e-5 {
					t.Errorf("seed %d, u %d: through s off by %.3g", seed, u, d)
				}
				if hub == 2 {
					worstT = max(worstT, d)
				}
			}
			restore()
		}
	}
	t.Logf("through t: worst error %.3g", worstT)
	if worstT < 1e-4 {
		t.Errorf("through t is as exact as through s (%.3g): the fixture does not tell them apart", worstT)
	}
}

// TestParallelInteractionPrior checks the interaction term I of the
// parallel answer's error against its definition: the mean squared error
// of the estimate when the cells of E[1_t | b1, b2] are drawn from the
// uninformative Dirichlet(1) over t's values (the bridges' own table
// observed, 10⁹ contexts, so variance and hub terms vanish): within 15 %
// over 3 000 draws, for each observed value.
func TestParallelInteractionPrior(t *testing.T) {
	m, err := scorer.NewBayes()
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(5, 9))
	const draws = 3000
	var sum [3]float64
	var pred [3]float64
	for range draws {
		f := make([][][]float64, 3)
		for a := range f {
			f[a] = make([][]float64, 2)
			for c := range f[a] {
				f[a][c] = make([]float64, 3)
				s := 0.0
				for v := range f[a][c] {
					f[a][c][v] = -math.Log(1 - rng.Float64()) // Gamma(1)
					s += f[a][c][v]
				}
				for v := range f[a][c] {
					f[a][c][v] /= s
				}
			}
		}
		st, exact := netWith(2, 1e9, true, f)
		for u := range exact {
			est, ok, err := m.Parallel(nil, st, 0, u, 1, 2, 3)
			if err != nil || !ok {
				t.Fatalf("ok %v, %v", ok, err)
			}
			for v, p := range est.Dist {
				d := p - exact[u][v]
				sum[u] += d * d
			}
			pred[u] = est.Err - est.Var
		}
	}
	for u := range sum {
		mc := sum[u] / draws
		t.Logf("u %d: interaction term %.4g, mean squared error over the prior %.4g (ratio %.3f)", u, pred[u], mc, pred[u]/mc)
		if math.Abs(pred[u]/mc-1) > 0.15 {
			t.Errorf("u %d: interaction term %.4g, Monte Carlo %.4g", u, pred[u], mc)
		}
	}
}

// TestParallelRefusals: a missing table gives no answer (ok false, no
// error), and bad arguments an error naming them, never a panic.
func TestParallelRefusals(t *testing.T) {
	m, err := scorer.NewBayes()
	if err != nil {
		t.Fatal(err)
	}
	st, _ := additiveNet(1, 1e6, false)
	var g graphidx.EntityID = 4
	st.entity(g, 2)
	if _, ok, err := m.Parallel(nil, st, 0, 0, 1, g, 3); ok || err != nil {
		t.Errorf("bridge never observed with s: ok %v, err %v; want no answer", ok, err)
	}
	if _, ok, err := m.Parallel(nil, randomFour(1, 2, 3, 4, 2), 0, 0, 1, 2, 3); ok || err != nil {
		t.Errorf("bridges of 3 and 4 values: ok %v, err %v; want no answer (parallelMaxCols)", ok, err)
	}
	for _, c := range []struct {
		u              int
		b1, b2, s, tgt graphidx.EntityID
	}{{5, 1, 2, 0, 3}, {-1, 1, 2, 0, 3}, {0, 1, 1, 0, 3}, {0, 0, 2, 0, 3}, {0, 1, 3, 0, 3}} {
		if _, ok, err := m.Parallel(nil, st, c.s, c.u, c.b1, c.b2, c.tgt); err == nil || ok {
			t.Errorf("%+v: ok %v, err %v; want an error", c, ok, err)
		}
	}
	if _, _, err := m.Parallel(nil, nil, 0, 0, 1, 2, 3); err == nil {
		t.Error("nil Stats accepted")
	}
}

// randomFour returns Stats of s, b1, b2, t (ids 0–3) with ks, k1, k2, kt
// values and random count tables for (s, b1), (s, b2), (b1, t), (b2, t).
func randomFour(seed uint64, ks, k1, k2, kt int) *memStats {
	rng := rand.New(rand.NewPCG(seed, 1))
	tab := func(ka, kb int) [][]uint32 {
		out := make([][]uint32, ka)
		for i := range out {
			out[i] = make([]uint32, kb)
			for j := range out[i] {
				out[i][j] = uint32(1 + rng.IntN(200))
			}
		}
		return out
	}
	st := newMemStats().entity(0, ks).entity(1, k1).entity(2, k2).entity(3, kt)
	return st.pair(0, 1, tab(ks, k1)).pair(0, 2, tab(ks, k2)).pair(1, 3, tab(k1, kt)).pair(2, 3, tab(k2, kt))
}

// BenchmarkParallel: one parallel estimate (no bridges' table, so both
// covariance assumptions) for binary and three-valued entities (the size
// bound, parallelMaxCols).
// go test ./scorer -run '^$' -bench Parallel -benchmem
func BenchmarkParallel(b *testing.B) {
	m, err := scorer.NewBayes()
	if err != nil {
		b.Fatal(err)
	}
	for _, k := range [][4]int{{2, 2, 2, 2}, {3, 3, 3, 3}} {
		st := randomFour(1, k[0], k[1], k[2], k[3])
		ws := scorer.NewWorkspace()
		ws.BorrowDist(true)
		b.Run(fmt.Sprintf("K=%d,%d,%d,%d", k[0], k[1], k[2], k[3]), func(b *testing.B) {
			for b.Loop() {
				if _, ok, err := m.Parallel(ws, st, 0, 1, 1, 2, 3); err != nil || !ok {
					b.Fatal(ok, err)
				}
			}
		})
	}
}
