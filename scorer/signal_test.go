package scorer_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"
)

// TestBayesEdgeCostHand checks EdgeCost on a table worked by hand. Counts
// {{40, 10}, {10, 40}} with α = 1 give the posterior-mean cells
// (41, 11, 11, 41)/104, both margins ½, and φ = (41·41 − 11·11)/(52·52) =
// 1560/2704 = 15/26; n = 100 + 4 = 104.
func TestBayesEdgeCostHand(t *testing.T) {
	t.Parallel()
	ps := graphidx.NewPairStats(1, 2, 2, 2, []uint32{40, 10, 10, 40})
	for _, c := range []struct {
		z, want float64
	}{
		{0, -math.Log(15.0 / 26)},
		{2, -math.Log(15.0/26 - 2/math.Sqrt(104))},
	} {
		m := mustBayes(t, scorer.WithSignalZ(c.z))
		if got := m.EdgeCost(ps); !near(got, c.want, 1e-12) {
			t.Errorf("z=%g: EdgeCost %.15g, want %.15g", c.z, got, c.want)
		}
	}
	// The cost is symmetric in the pair's orientation.
	rev := graphidx.NewPairStats(2, 1, 2, 2, []uint32{40, 10, 10, 40})
	if a, b := mustBayes(t).EdgeCost(ps), mustBayes(t).EdgeCost(rev); a != b {
		t.Errorf("EdgeCost(a,b) %g ≠ EdgeCost(b,a) %g", a, b)
	}
}

// TestBayesEdgeCostMatchesFormulas compares EdgeCost (z = 0) with −log ρ_m
// computed independently on the smoothed counts N + α: for 2×2 tables by
// the φ coefficient (ad − bc)/√((a+b)(c+d)(a+c)(b+d)) (common practice),
// for tables with a binary side by Pearson's χ² of gonum stat.ChiSquare
// and V = √(χ²/(n·(min(K_a, K_b) − 1))) (Cramér 1946; ρ_m = V there), and
// otherwise as the second singular value of p_uv/√(p_u p_v) by gonum's SVD
// (the maximal correlation; Witsenhausen 1975).
func TestBayesEdgeCostMatchesFormulas(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(17, 3))
	for _, alpha := range []float64{1, 0.5} {
		m := mustBayes(t, scorer.WithSignalZ(0), scorer.WithAlpha(alpha))
		for i := range 60 {
			ka, kb := 2, 2
			if i >= 20 {
				ka, kb = 2+rng.IntN(5), 2+rng.IntN(5)
			}
			counts := make([]uint32, ka*kb)
			scale := 1 + rng.IntN(300)
			for j := range counts {
				counts[j] = uint32(rng.IntN(scale))
			}
			ps := graphidx.NewPairStats(1, 2, ka, kb, counts)
			obs := make([]float64, ka*kb)
			row, col := make([]float64, ka), make([]float64, kb)
			n := 0.0
			for u := range ka {
				for v := range kb {
					x := float64(counts[u*kb+v]) + alpha
					obs[u*kb+v] = x
					row[u] += x
					col[v] += x
					n += x
				}
			}
			var want float64
			switch {
			case ka == 2 && kb == 2:
				a, b, c, d := obs[0], obs[1], obs[2], obs[3]
				want = math.Abs(a*d-b*c) / math.Sqrt((a+b)*(c+d)*(a+c)*(b+d))
			case ka > 2 && kb > 2:
				want = secondSingularValue(obs, row, col, n)
			default:
				exp := make([]float64, ka*kb)
				for u := range ka {
					for v := range kb {
						exp[u*kb+v] = row[u] * col[v] / n
					}
				}
				want = math.Sqrt(stat.ChiSquare(obs, exp) / (n * float64(min(ka, kb)-1)))
			}
			got := math.Exp(-m.EdgeCost(ps))
			if want < 1e-9 {
				continue // below the floor the cost saturates
			}
			if !near(got, want, 1e-9*max(1, want)) {
				t.Errorf("α=%g %d×%d %v: V %.12g, want %.12g", alpha, ka, kb, counts, got, want)
			}
		}
	}
}

// secondSingularValue returns the second singular value of the K_a×K_b
// matrix p_uv/√(p_u p_v), p = obs/n, by gonum's SVD.
func secondSingularValue(obs, row, col []float64, n float64) float64 {
	ka, kb := len(row), len(col)
	q := mat.NewDense(ka, kb, nil)
	for u := range ka {
		for v := range kb {
			q.Set(u, v, obs[u*kb+v]/n/math.Sqrt(row[u]/n*col[v]/n))
		}
	}
	var svd mat.SVD
	if !svd.Factorize(q, mat.SVDNone) {
		panic("SVD failed")
	}
	return svd.Values(nil)[1]
}

// TestMaxCorrelationPower: beyond 16 values the signal is a power
// iteration's lower bound of ρ_m: between Cramér's V and the exact ρ_m
// (gonum's SVD), equal to it on a table with a dominant two-block contrast,
// and the same bits for (a, b) and (b, a) (z = 0, so exp(−EdgeCost) is the
// signal itself).
func TestMaxCorrelationPower(t *testing.T) {
	t.Parallel()
	m := mustBayes(t, scorer.WithSignalZ(0))
	rng := rand.New(rand.NewPCG(8, 8))
	for _, k := range []int{17, 24, 40} {
		for trial := range 4 {
			c := make([]uint32, k*k)
			obs := make([]float64, k*k)
			row, col := make([]float64, k), make([]float64, k)
			n := 0.0
			for u := range k {
				for v := range k {
					x := rng.IntN(50)
					if trial%2 == 1 && (u < k/2) == (v < k/2) {
						x += 400
					}
					c[u*k+v] = uint32(x)
					obs[u*k+v] = float64(x) + 1
					row[u] += float64(x) + 1
					col[v] += float64(x) + 1
					n += float64(x) + 1
				}
			}
			exp := make([]float64, k*k)
			for u := range k {
				for v := range k {
					exp[u*k+v] = row[u] * col[v] / n
				}
			}
			v := math.Sqrt(stat.ChiSquare(obs, exp) / (n * float64(k-1)))
			want := secondSingularValue(obs, row, col, n)
			ps := graphidx.NewPairStats(1, 2, k, k, c)
			got := math.Exp(-m.EdgeCost(ps))
			if !(got >= v-1e-12 && got <= want+1e-12) {
				t.Errorf("k %d trial %d: %g outside [V %g, ρ_m %g]", k, trial, got, v, want)
			}
			if trial%2 == 1 && math.Abs(got-want) > 1e-6 {
				t.Errorf("k %d dominant contrast: %g, ρ_m %g", k, got, want)
			}
			tr := make([]uint32, k*k)
			for u := range k {
				for w := range k {
					tr[w*k+u] = c[u*k+w]
				}
			}
			if back := math.Exp(-m.EdgeCost(graphidx.NewPairStats(2, 1, k, k, tr))); back != got {
				t.Errorf("k %d trial %d: (a, b) %v, (b, a) %v", k, trial, got, back)
			}
		}
	}
}

// TestMaxCorrelationAlongMarkovChain: for X → Y → Z Markov with 3–4 values
// each, the maximal correlation of (X, Z) is at most the product of those
// of (X, Y) and (Y, Z) (Witsenhausen 1975), so the z = 0 costs satisfy
// cost(X, Z) ≥ cost(X, Y) + cost(Y, Z); and for a channel that carries one
// binary contrast (Y depends on X only through X < K/2), the bound holds
// with equality while Cramér's V would read the edge √(K − 1) times weaker.
func TestMaxCorrelationAlongMarkovChain(t *testing.T) {
	t.Parallel()
	m := mustBayes(t, scorer.WithSignalZ(0))
	rng := rand.New(rand.NewPCG(9, 9))
	dirichlet := func(k int) []float64 {
		p := make([]float64, k)
		s := 0.0
		for i := range p {
			p[i] = rng.ExpFloat64()
			s += p[i]
		}
		for i := range p {
			p[i] /= s
		}
		return p
	}
	table := func(p []float64, ka, kb int) graphidx.PairStats {
		c := make([]uint32, len(p))
		for i := range c {
			c[i] = uint32(math.Round(p[i] * 1e9))
		}
		return graphidx.NewPairStats(1, 2, ka, kb, c)
	}
	for i := range 30 {
		kx, ky, kz := 3+i%2, 3+(i/2)%2, 3+(i/4)%2
		px := dirichlet(kx)
		pyx := make([][]float64, kx) // P(Y | X = x)
		contrast := i%3 == 0
		for x := range kx {
			if contrast && x > 0 && x < kx/2 {
				pyx[x] = pyx[0]
			} else if contrast && x > kx/2 {
				pyx[x] = pyx[kx/2]
			} else {
				pyx[x] = dirichlet(ky)
			}
		}
		pzy := make([][]float64, ky)
		for y := range ky {
			pzy[y] = dirichlet(kz)
		}
		xy, yz, xz := make([]float64, kx*ky), make([]float64, ky*kz), make([]float64, kx*kz)
		for x := range kx {
			for y := range ky {
				for z := range kz {
					p := px[x] * pyx[x][y] * pzy[y][z]
					xy[x*ky+y] += p
					yz[y*kz+z] += p
					xz[x*kz+z] += p
				}
			}
		}
		cxy, cyz, cxz := m.EdgeCost(table(xy, kx, ky)), m.EdgeCost(table(yz, ky, kz)), m.EdgeCost(table(xz, kx, kz))
		if cxz > 10 {
			continue
		}
		if cxz < cxy+cyz-1e-4 {
			t.Errorf("case %d: cost(X,Z) %.6f < cost(X,Y)+cost(Y,Z) %.6f", i, cxz, cxy+cyz)
		}
	}
	// A rank-one channel: X with 4 values acts on Y (4 values) only through
	// X ≥ 2; ρ_m(X; Y) is then the |φ| of that binary contrast, and V is
	// ρ_m/√3.
	px := []float64{0.1, 0.2, 0.3, 0.4}
	lo, hi := []float64{0.6, 0.2, 0.1, 0.1}, []float64{0.1, 0.1, 0.2, 0.6}
	xy := make([]float64, 16)
	for x := range 4 {
		r := lo
		if x >= 2 {
			r = hi
		}
		for y := range 4 {
			xy[x*4+y] = px[x] * r[y]
		}
	}
	// The contrast B = 1[X ≥ 2] with P(B = 1) = 0.7, and Y | B: the maximal
	// correlation of (X, Y) equals that of (B, Y), which has a binary side,
	// so its V is ρ_m.
	by := make([]float64, 8)
	for y := range 4 {
		by[y] = 0.3 * lo[y]
		by[4+y] = 0.7 * hi[y]
	}
	got := math.Exp(-m.EdgeCost(table(xy, 4, 4)))
	want := math.Exp(-m.EdgeCost(table(by, 2, 4)))
	if !near(got, want, 1e-6) {
		t.Errorf("rank-one channel: ρ_m %.9f, want the contrast's %.9f", got, want)
	}
}

// TestEdgeCostAddsAlongMarkovChain: for binary X → Y → Z Markov,
// Cov(X, Z) = Cov(X, Y)·Cov(Y, Z)/Var(Y) (E[Z | Y] is linear in a binary
// Y), so φ_XZ = φ_XY·φ_YZ and the z = 0 costs add: cost(X, Z) = cost(X, Y) +
// cost(Y, Z). Tables are the exact joints scaled to 10⁹ contexts, so the
// prior and rounding matter below 10⁻⁶.
func TestEdgeCostAddsAlongMarkovChain(t *testing.T) {
	t.Parallel()
	m := mustBayes(t, scorer.WithSignalZ(0))
	rng := rand.New(rand.NewPCG(5, 5))
	for range 20 {
		px := rng.Float64()*0.8 + 0.1
		// P(Y=1 | X=x), P(Z=1 | Y=y)
		py := [2]float64{rng.Float64(), rng.Float64()}
		pz := [2]float64{rng.Float64(), rng.Float64()}
		bern := func(p float64, v int) float64 {
			if v == 1 {
				return p
			}
			return 1 - p
		}
		pX := [2]float64{1 - px, px}
		var xy, yz, xz [4]float64
		for x := range 2 {
			for y := range 2 {
				for z := range 2 {
					p := pX[x] * bern(py[x], y) * bern(pz[y], z)
					xy[x*2+y] += p
					yz[y*2+z] += p
					xz[x*2+z] += p
				}
			}
		}
		table := func(p [4]float64) graphidx.PairStats {
			c := make([]uint32, 4)
			for i := range c {
				c[i] = uint32(math.Round(p[i] * 1e9))
			}
			return graphidx.NewPairStats(1, 2, 2, 2, c)
		}
		cxy, cyz, cxz := m.EdgeCost(table(xy)), m.EdgeCost(table(yz)), m.EdgeCost(table(xz))
		if cxz > 10 { // φ below e⁻¹⁰: counts no longer resolve it
			continue
		}
		if !near(cxz, cxy+cyz, 1e-3) {
			t.Errorf("cost(X,Z) %.6f, cost(X,Y)+cost(Y,Z) %.6f (P(Y|X) %v, P(Z|Y) %v)", cxz, cxy+cyz, py, pz)
		}
	}
}

func TestEdgeCostBounds(t *testing.T) {
	t.Parallel()
	m := mustBayes(t)
	// Independent table: V̂ = 0, so the lower bound is below ε.
	if got := m.EdgeCost(graphidx.NewPairStats(1, 2, 2, 2, []uint32{25, 25, 25, 25})); got != scorer.MaxEdgeCost {
		t.Errorf("independent table: %g, want MaxEdgeCost %g", got, scorer.MaxEdgeCost)
	}
	// Presence-only entities carry no signal.
	if got := m.EdgeCost(graphidx.NewPairStats(1, 2, 1, 2, []uint32{25, 25})); got != scorer.MaxEdgeCost {
		t.Errorf("K_a = 1: %g, want MaxEdgeCost", got)
	}
	// A copying edge seen 10⁹ times costs about 0.
	if got := mustBayes(t, scorer.WithSignalZ(0)).EdgeCost(graphidx.NewPairStats(1, 2, 2, 2, []uint32{5e8, 0, 0, 5e8})); got < 0 || got > 1e-8 {
		t.Errorf("copying edge: %g, want ≈ 0", got)
	}
	// Few contexts: z/√n swamps a strong-looking table.
	if got := m.EdgeCost(graphidx.NewPairStats(1, 2, 2, 2, []uint32{2, 0, 0, 2})); got != scorer.MaxEdgeCost {
		t.Errorf("4 contexts: %g, want MaxEdgeCost", got)
	}
	rng := rand.New(rand.NewPCG(9, 9))
	for range 200 {
		ka, kb := 1+rng.IntN(6), 1+rng.IntN(6)
		c := make([]uint32, ka*kb)
		for i := range c {
			c[i] = uint32(rng.IntN(50))
		}
		if got := m.EdgeCost(graphidx.NewPairStats(1, 2, ka, kb, c)); !(got >= 0 && got <= scorer.MaxEdgeCost) {
			t.Errorf("%d×%d %v: EdgeCost %g outside [0, MaxEdgeCost]", ka, kb, c, got)
		}
	}
}

// EdgeCostBound returns EdgeCost and SignalBound bit for bit (the router
// keeps its bound for the chain score, KnownSignalBounder), and a 2×2
// table's bound is the same bit for bit transposed (the router hands it
// back for either orientation).
func TestEdgeCostBoundMatches(t *testing.T) {
	t.Parallel()
	m := mustBayes(t)
	rng := rand.New(rand.NewPCG(11, 3))
	for range 500 {
		ka, kb := 1+rng.IntN(6), 1+rng.IntN(6)
		c := make([]uint32, ka*kb)
		for i := range c {
			c[i] = uint32(rng.IntN(40))
		}
		ps := graphidx.NewPairStats(1, 2, ka, kb, c)
		cost, lb := m.EdgeCostBound(ps)
		if want := m.EdgeCost(ps); math.Float64bits(cost) != math.Float64bits(want) {
			t.Errorf("%d×%d %v: EdgeCostBound cost %v, EdgeCost %v", ka, kb, c, cost, want)
		}
		if want := m.SignalBound(ps); math.Float64bits(lb) != math.Float64bits(want) {
			t.Errorf("%d×%d %v: EdgeCostBound bound %v, SignalBound %v", ka, kb, c, lb, want)
		}
		if ka == 2 && kb == 2 {
			if tr := m.SignalBound(ps.Transpose()); math.Float64bits(tr) != math.Float64bits(lb) {
				t.Errorf("2×2 %v: SignalBound %v, transposed %v", c, lb, tr)
			}
		}
	}
}

func TestEdgeCostAllocationFree(t *testing.T) { // not parallel: AllocsPerRun
	m := mustBayes(t)
	ps := graphidx.NewPairStats(1, 2, 3, 4, []uint32{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12})
	if a := testing.AllocsPerRun(100, func() { m.EdgeCost(ps) }); a != 0 {
		t.Errorf("EdgeCost allocates %v times", a)
	}
}

func TestReferenceBias(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		est, ref []float64
		want     float64
	}{
		// hand computed: 0.3² + 0.3²
		{[]float64{0.2, 0.8}, []float64{0.5, 0.5}, 0.18},
		{[]float64{0.2, 0.8}, []float64{0.2, 0.8}, 0},
		// 0.1² + 0.1² + 0.2²
		{[]float64{0.1, 0.3, 0.6}, []float64{0.2, 0.2, 0.6 + 0.2}, 0.06},
		{[]float64{0.5, 0.5}, []float64{1}, math.Inf(1)},
	} {
		if got := scorer.ReferenceBias(c.est, c.ref); !near(got, c.want, 1e-15) && got != c.want {
			t.Errorf("ReferenceBias(%v, %v) = %g, want %g", c.est, c.ref, got, c.want)
		}
	}
}

func BenchmarkEdgeCost(b *testing.B) {
	for _, k := range []int{2, 8} {
		b.Run(fmt.Sprintf("K=%d", k), func(b *testing.B) {
			rng := rand.New(rand.NewPCG(1, uint64(k)))
			c := make([]uint32, k*k)
			for i := range c {
				c[i] = uint32(rng.IntN(200))
			}
			ps := graphidx.NewPairStats(1, 2, k, k, c)
			m := mustBayes(b)
			var s float64
			b.ReportAllocs()
			for b.Loop() {
				s = m.EdgeCost(ps)
			}
			if !(s >= 0 && s <= scorer.MaxEdgeCost) {
				b.Fatalf("cost %g", s)
			}
		})
	}
}
