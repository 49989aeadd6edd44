package scorer_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// smoothed returns (c_v + 1)/(Σ c + K), the smoothed marginal (α = 1).
func smoothed(c []uint64) []float64 {
	tot := float64(len(c))
	for _, x := range c {
		tot += float64(x)
	}
	out := make([]float64, len(c))
	for v, x := range c {
		out[v] = (float64(x) + 1) / tot
	}
	return out
}

// margVar is (1 − Σ m̂²)/(N + K + 1), the posterior variance of the smoothed
// marginal (α = 1) that the model adds to the bound.
func margVar(c []uint64) float64 {
	m := smoothed(c)
	n := float64(len(c)) + 1
	sq := 0.0
	for v, x := range c {
		n += float64(x)
		sq += m[v] * m[v]
	}
	return (1 - sq) / n
}

// TestRangeBound: for a pair never observed together the direct estimate is
// the target's marginal, and by Bayes' rule p_v = P(s = u | t = v)·m_v/P_u
// ≤ m_v/P_u and 1 − p_v ≤ (1 − m_v)/P_u, so Σ_v (p_v − m_v)² is at most
// min(Σ_v max(U_v, D_v)², 2·min(Σ U, Σ D)²) with U_v = min(1 − m_v, m_v·r),
// D_v = min(m_v, (1 − m_v)·r), r = (1 − P_u)/P_u. The error becomes
// min(E0, R + Var(m̂_t)), computed here by hand from the marginals. With
// η large (E0 never binding) the error must cover the exact squared
// deviation of random joint tables (the bound is a bound), and a table that
// attains it shows it is tight.
func TestRangeBound(t *testing.T) {
	t.Parallel()
	const s, tg = 1, 2
	cases := []struct {
		name   string
		ms, mt []uint64
		u      int
		want   float64 // R by hand (before Var(m̂_t))
	}{
		// P_u = 5001/10002 ≈ 0.5, m_1 = 101/10002 ≈ 0.0101: p_1 ∈ [0, 2·m_1],
		// so |p_1 − m_1| ≤ m_1 and R = 2·m_1² (the ASIA case P(asia | smoke)).
		{"common value, rare target value", []uint64{5000, 5000}, []uint64{9900, 100}, 1,
			2 * (101.0 / 10002) * (101.0 / 10002)},
		// P_u = 2001/10002 (r ≈ 4), m_1 = 1001/10002: U_1 = m_1·r, D_1 = m_1.
		{"one in five, target one in ten", []uint64{8000, 2000}, []uint64{9000, 1000}, 1,
			func() float64 {
				pu, m1 := 2001.0/10002, 1001.0/10002
				d := min(1-m1, m1*(1-pu)/pu)
				return 2 * d * d
			}()},
		// A rare observed value (r ≈ 999) bounds nothing: R = 2·max(m, 1 − m)².
		{"rare value", []uint64{9990, 10}, []uint64{5000, 5000}, 1, 2 * 0.5 * 0.5},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			st := newLocalStats()
			st.entity(s, len(c.ms)).entity(tg, len(c.mt))
			st.marg[s], st.marg[tg] = c.ms, c.mt
			// η large enough that E0 never binds: the error is R + Var(m̂_t).
			m, err := scorer.NewBayes(scorer.WithUnseenSpread(100))
			if err != nil {
				t.Fatal(err)
			}
			e, err := m.Direct(nil, st, s, c.u, tg)
			if err != nil {
				t.Fatal(err)
			}
			want := c.want + margVar(c.mt)
			if math.Abs(e.Err-want) > 1e-12 {
				t.Errorf("Err = %.10g, want R + Var(m̂_t) = %.10g", e.Err, want)
			}
			// With the fitted η, E0 = η·(1 − P_u)²·(1 − 1/K_t) binds when smaller.
			d, err := scorer.NewBayes()
			if err != nil {
				t.Fatal(err)
			}
			e0, err := d.Direct(nil, st, s, c.u, tg)
			if err != nil {
				t.Fatal(err)
			}
			pu := smoothed(c.ms)[c.u]
			prior := d.UnseenSpread() * (1 - pu) * (1 - pu) * 0.5
			if got, w := e0.Err, min(prior, want); math.Abs(got-w) > 1e-12 {
				t.Errorf("default model: Err = %.10g, want min(E0 %.6g, R + Var %.6g)", got, prior, want)
			}
		})
	}

	// Random joint tables of (s, t), 2 or 3 values each: the exact squared
	// deviation of every conditional from the marginal is within R (the
	// marginals carry 10⁹ contexts, so smoothing moves them by ~1e-9).
	rng := rand.New(rand.NewPCG(7, 11))
	m, err := scorer.NewBayes(scorer.WithUnseenSpread(100))
	if err != nil {
		t.Fatal(err)
	}
	for trial := range 400 {
		ks, kt := 2+rng.IntN(2), 2+rng.IntN(2)
		joint := make([][]float64, ks)
		tot := 0.0
		for a := range joint {
			joint[a] = make([]float64, kt)
			for b := range joint[a] {
				// Skewed cells (cubes of uniforms) so that some values are rare.
				x := rng.Float64()
				joint[a][b] = x * x * x
				tot += joint[a][b]
			}
		}
		const n = 1e9
		ms, mt := make([]uint64, ks), make([]uint64, kt)
		for a := range joint {
			for b := range joint[a] {
				joint[a][b] /= tot
				c := uint64(joint[a][b] * n)
				ms[a] += c
				mt[b] += c
			}
		}
		st := newLocalStats()
		st.entity(s, ks).entity(tg, kt)
		st.marg[s], st.marg[tg] = ms, mt
		mtS := smoothed(mt)
		for u := range ks {
			pu := 0.0
			for b := range kt {
				pu += joint[u][b]
			}
			dev := 0.0
			for b := range kt {
				d := joint[u][b]/pu - mtS[b]
				dev += d * d
			}
			e, err := m.Direct(nil, st, s, u, graphidx.EntityID(tg))
			if err != nil {
				t.Fatal(err)
			}
			if e.Err < dev-1e-6 {
				t.Fatalf("trial %d, u = %d: Err %.6g below the exact squared deviation %.6g", trial, u, e.Err, dev)
			}
		}
	}

	// Tightness: t binary with P(t = 1) = 0.1 and s = 1 exactly when t = 1 or
	// in a further 10 % of contexts (P_u = 0.2): p_1 = 0.1/0.2 = 0.5, the
	// largest value Bayes' rule allows, so R = 2·0.4² is attained (up to
	// smoothing).
	st := newLocalStats()
	st.entity(s, 2).entity(tg, 2)
	st.marg[s], st.marg[tg] = []uint64{800000, 200000}, []uint64{900000, 100000}
	e, err := m.Direct(nil, st, s, 1, tg)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(e.Err-0.32) > 1e-4 {
		t.Errorf("tight case: Err %.6g, want 2·0.4² = 0.32", e.Err)
	}
}
