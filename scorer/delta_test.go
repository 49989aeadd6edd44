package scorer_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distmv"
	"gonum.org/v1/gonum/stat/distuv"
)

// chainCase is a random chain: ks[i] values for path node i, row totals
// drawn uniformly from [nMin, nMax], CPT rows from Dirichlet(conc,…,conc).
type chainCase struct {
	ks         []int
	nMin, nMax int
	conc       float64
	seed       uint64
}

func (c chainCase) String() string {
	return fmt.Sprintf("K=%v/n=%d-%d/conc=%g", c.ks, c.nMin, c.nMax, c.conc)
}

// build returns Stats for the path ids 1..len(ks) and the count tables.
func (c chainCase) build() (*memStats, [][][]uint32) {
	rng := rand.New(rand.NewPCG(c.seed, 0x5c0e))
	gamma := distuv.Gamma{Alpha: c.conc, Beta: 1, Src: rng}
	st := newMemStats()
	for i, k := range c.ks {
		st.entity(graphidx.EntityID(i+1), k)
	}
	tables := make([][][]uint32, len(c.ks)-1)
	for e := range tables {
		ka, kb := c.ks[e], c.ks[e+1]
		rows := make([][]uint32, ka)
		for r := range rows {
			p := make([]float64, kb)
			s := 0.0
			for v := range p {
				p[v] = gamma.Rand()
				s += p[v]
			}
			n := c.nMin + rng.IntN(c.nMax-c.nMin+1)
			rows[r] = make([]uint32, kb)
			for v := range p {
				rows[r][v] = uint32(math.Round(float64(n) * p[v] / s))
			}
		}
		tables[e] = rows
		st.pair(graphidx.EntityID(e+1), graphidx.EntityID(e+2), rows)
	}
	return st, tables
}

// posteriors returns, per edge and row, the Dirichlet(N[r][·] + α) posterior.
func posteriors(tables [][][]uint32, alpha float64, src rand.Source) [][]*distmv.Dirichlet {
	out := make([][]*distmv.Dirichlet, len(tables))
	for e, rows := range tables {
		out[e] = make([]*distmv.Dirichlet, len(rows))
		for r, row := range rows {
			a := make([]float64, len(row))
			for v, c := range row {
				a[v] = float64(c) + alpha
			}
			out[e][r] = distmv.NewDirichlet(a, src)
		}
	}
	return out
}

// exactChainVariance returns Σ_v Var(p̂_v) exactly under the same posterior
// (rows independent Dirichlet), by propagating the second-moment matrix
// X_k = E[x_kᵀ x_k] of the random row vector x_k = x_(k−1) M_k:
//
//	X_k = M̄_kᵀ X_(k−1) M̄_k + Σ_r X_(k−1)[r,r] Σ_(k,r)
//
// (independence of M_k from x_(k−1) and of the rows of M_k; common
// practice for products of independent random matrices). Written with
// gonum mat and distmv, independently of the scorer's backward pass.
func exactChainVariance(post [][]*distmv.Dirichlet, u int) float64 {
	k0 := len(post[0])
	X := mat.NewSymDense(k0, nil)
	X.SetSym(u, u, 1)
	mean := mat.NewVecDense(k0, nil)
	mean.SetVec(u, 1)
	for _, rows := range post {
		ka, kb := len(rows), rows[0].Dim()
		mbar := mat.NewDense(ka, kb, nil)
		for r, d := range rows {
			mbar.SetRow(r, d.Mean(nil))
		}
		var next mat.Dense
		next.Product(mbar.T(), X, mbar)
		for r, d := range rows {
			var cov mat.SymDense
			d.CovarianceMatrix(&cov)
			var scaled mat.Dense
			scaled.Scale(X.At(r, r), &cov)
			next.Add(&next, &scaled)
		}
		X = mat.NewSymDense(kb, nil)
		for i := 0; i < kb; i++ {
			for j := i; j < kb; j++ {
				X.SetSym(i, j, (next.At(i, j)+next.At(j, i))/2)
			}
		}
		nm := mat.NewVecDense(kb, nil)
		nm.MulVec(mbar.T(), mean)
		mean = nm
	}
	s := 0.0
	for v := 0; v < mean.Len(); v++ {
		s += X.At(v, v) - mean.AtVec(v)*mean.AtVec(v)
	}
	return s
}

// monteCarloChainVariance draws every row of every M_k from its posterior
// Dirichlet, multiplies, and returns Σ_v of the sample variance of p̂_v.
func monteCarloChainVariance(post [][]*distmv.Dirichlet, u, draws int) float64 {
	kt := post[len(post)-1][0].Dim()
	sum := make([]float64, kt)
	sum2 := make([]float64, kt)
	x := make([]float64, 0, 64)
	y := make([]float64, 0, 64)
	row := make([]float64, 64)
	for range draws {
		x = x[:len(post[0])]
		clear(x)
		x[u] = 1
		for _, rows := range post {
			kb := rows[0].Dim()
			y = y[:kb]
			clear(y)
			for r, d := range rows {
				if x[r] == 0 {
					continue
				}
				d.Rand(row[:kb])
				for v := range y {
					y[v] += x[r] * row[v]
				}
			}
			x, y = y, x
		}
		for v, p := range x {
			sum[v] += p
			sum2[v] += p * p
		}
	}
	n := float64(draws)
	s := 0.0
	for v := range sum {
		m := sum[v] / n
		s += (sum2[v] - n*m*m) / (n - 1)
	}
	return s
}

// TestDeltaMethodMonteCarlo checks the delta-method chain variance against a
// seeded Monte Carlo of Dirichlet posterior draws (docs/DESIGN.md, Error model:
// within 10%) and against the exact second-moment recursion.
//
// Row totals are at least ~20: the delta method keeps the first-order terms
// x̄_(k−1)[r]² and drops Var(x_(k−1)[r]), whose relative size is O(1/n) in
// the row counts n. The exact variance equals the delta formula with
// x̄[r]² replaced by E[x[r]²] = x̄[r]² + Var(x[r]) (law of total variance,
// peeled one edge at a time), so the delta value is a lower bound, and with a
// handful of counts per row it can fall short by more than 10% (the
// "small counts" cases below are logged, not asserted).
func TestDeltaMethodMonteCarlo(t *testing.T) {
	t.Parallel()
	const draws = 20000
	cases := []struct {
		c      chainCase
		assert bool
	}{
		{chainCase{ks: []int{2, 2}, nMin: 20, nMax: 60, conc: 1, seed: 1}, true},
		{chainCase{ks: []int{2, 2, 2}, nMin: 20, nMax: 60, conc: 1, seed: 2}, true},
		{chainCase{ks: []int{2, 2, 2, 2, 2}, nMin: 30, nMax: 200, conc: 0.5, seed: 3}, true},
		{chainCase{ks: []int{3, 3, 3}, nMin: 40, nMax: 120, conc: 1, seed: 4}, true},
		{chainCase{ks: []int{3, 4, 2, 3}, nMin: 40, nMax: 200, conc: 1, seed: 5}, true},
		{chainCase{ks: []int{4, 4, 4, 4, 4}, nMin: 60, nMax: 300, conc: 2, seed: 6}, true},
		{chainCase{ks: []int{2, 5, 5, 2}, nMin: 50, nMax: 500, conc: 0.3, seed: 7}, true},
		{chainCase{ks: []int{6, 6, 6}, nMin: 100, nMax: 1000, conc: 1, seed: 8}, true},
		{chainCase{ks: []int{2, 8, 3}, nMin: 80, nMax: 400, conc: 0.5, seed: 9}, true},
		{chainCase{ks: []int{2, 2, 2, 2}, nMin: 1, nMax: 5, conc: 1, seed: 10}, false}, // small counts
		{chainCase{ks: []int{3, 3, 3}, nMin: 2, nMax: 8, conc: 1, seed: 11}, false},    // small counts
	}
	b := mustBayes(t, scorer.WithBeta(0), scorer.WithMissingSignal(0, 0))
	bx := mustBayes(t, scorer.WithBeta(0), scorer.WithMissingSignal(0, 0), scorer.WithVariance(scorer.ExactMoments))
	for i, tc := range cases {
		t.Run(tc.c.String(), func(t *testing.T) {
			t.Parallel()
			st, tables := tc.c.build()
			u := i % tc.c.ks[0]
			path := make([]graphidx.EntityID, len(tc.c.ks))
			for j := range path {
				path[j] = graphidx.EntityID(j + 1)
			}
			est, err := b.Chain(nil, st, path[0], u, path[1:len(path)-1], path[len(path)-1])
			if err != nil {
				t.Fatal(err)
			}
			ex, err := bx.Chain(nil, st, path[0], u, path[1:len(path)-1], path[len(path)-1])
			if err != nil {
				t.Fatal(err)
			}
			for v := range est.Dist {
				if !near(ex.Dist[v], est.Dist[v], 1e-14) {
					t.Errorf("ExactMoments Dist %v, DeltaMethod Dist %v", ex.Dist, est.Dist)
				}
			}
			src := rand.NewPCG(tc.c.seed, 0xd1c)
			// A chain's hops use the hop prior; a path without bridges is
			// the direct estimate, with α.
			alpha := b.HopAlpha()
			if len(tc.c.ks) == 2 {
				alpha = b.Alpha()
			}
			post := posteriors(tables, alpha, src)
			exact := exactChainVariance(post, u)
			mc := monteCarloChainVariance(post, u, draws)
			relMC := (est.Err - mc) / mc
			relExact := (est.Err - exact) / exact
			t.Logf("delta %.4e  MC %.4e (%+.1f%%)  exact %.4e (%+.1f%%)", est.Err, mc, 100*relMC, exact, 100*relExact)
			// The Monte Carlo itself must agree with the exact moments
			// (relative sd of a variance estimate ≈ √(2/draws) ≈ 1%).
			if math.Abs(mc-exact) > 0.05*exact {
				t.Errorf("Monte Carlo %.4e disagrees with exact %.4e", mc, exact)
			}
			// ExactMoments reproduces the test's independent recursion
			// (gonum mat + distmv) to rounding, small counts included.
			if math.Abs(ex.Err-exact) > 1e-10*exact {
				t.Errorf("ExactMoments %.12e, reference recursion %.12e", ex.Err, exact)
			}
			if est.Err > exact*(1+1e-9) {
				t.Errorf("delta %.6e above exact %.6e; it must be a lower bound", est.Err, exact)
			}
			if tc.assert && math.Abs(relMC) > 0.10 {
				t.Errorf("delta %.4e vs Monte Carlo %.4e: %+.1f%%, want within 10%%", est.Err, mc, 100*relMC)
			}
		})
	}
}
