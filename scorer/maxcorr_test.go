package scorer

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"gonum.org/v1/gonum/mat"
)

// randomTable returns a k×k table of random counts below 200 (seeded).
func randomTable(k int, seed uint64) graphidx.PairStats {
	rng := rand.New(rand.NewPCG(seed, uint64(k)))
	c := make([]uint32, k*k)
	for i := range c {
		c[i] = uint32(rng.IntN(200))
	}
	return graphidx.NewPairStats(1, 2, k, k, c)
}

// TestMaxCorrelationBounds checks V ≤ ρ_m ≤ √(k − 1)·V (the trace of the
// Gram matrix is (k − 1)·V², at most k − 1 nonzero eigenvalues), equality
// with V when a side is binary, and symmetry under transposition.
func TestMaxCorrelationBounds(t *testing.T) {
	t.Parallel()
	for k := 2; k <= 8; k++ {
		for seed := range uint64(20) {
			ps := randomTable(k, seed)
			rho, n := maxCorrelation(ps, 1)
			v, nv := cramersV(ps, 1)
			if n != nv {
				t.Fatalf("k %d: n %g, cramersV's %g", k, n, nv)
			}
			if k == 2 && rho != v {
				t.Errorf("2×2: ρ_m %g, V %g; want equal", rho, v)
			}
			if !(rho >= v && rho <= math.Sqrt(float64(k-1))*v*(1+1e-12)) {
				t.Errorf("k %d seed %d: ρ_m %g outside [V, √(k−1)·V] = [%g, %g]", k, seed, rho, v, math.Sqrt(float64(k-1))*v)
			}
			// The transpose has the same singular values.
			tr := graphidx.NewPairStats(2, 1, k, k, transpose(ps, k))
			if rt, _ := maxCorrelation(tr, 1); math.Abs(rt-rho) > 1e-12 {
				t.Errorf("k %d seed %d: ρ_m %g, transposed %g", k, seed, rho, rt)
			}
		}
	}
}

// TestSymMaxEigen compares the Householder-and-bisection eigenvalue with
// gonum's EigenSym on random singular positive semi-definite matrices BBᵀ
// (B of k×(k−1)) of 5 to 64 rows, as maxCorrelation's Gram matrices are.
func TestSymMaxEigen(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(3, 4))
	for _, k := range []int{5, 6, 8, 13, 32, 64} {
		for range 5 {
			b := make([]float64, k*(k-1))
			for i := range b {
				b[i] = rng.NormFloat64()
			}
			g := make([]float64, k*k)
			for i := range k {
				for j := range k {
					for c := range k - 1 {
						g[i*k+j] += b[i*(k-1)+c] * b[j*(k-1)+c]
					}
				}
			}
			var es mat.EigenSym
			if !es.Factorize(mat.NewSymDense(k, slices.Clone(g)), false) {
				t.Fatal("EigenSym failed")
			}
			vals := es.Values(nil)
			want := vals[len(vals)-1]
			if got := symMaxEigen(g, k); math.Abs(got-want) > 1e-12*want {
				t.Errorf("k %d: %.15g, EigenSym %.15g", k, got, want)
			}
		}
	}
}

func transpose(ps graphidx.PairStats, k int) []uint32 {
	out := make([]uint32, k*k)
	for u := range k {
		for v := range k {
			out[v*k+u] = ps.Count(u, v)
		}
	}
	return out
}

var sinkSignal float64

// BenchmarkEdgeSignal compares the maximal correlation with Cramér's V
// (the signal before it) on random K×K tables, in the same run: the cost of
// the largest eigenvalue over the χ² sum. Both must not allocate.
//
//	go test ./scorer -run '^$' -bench EdgeSignal -benchmem
func BenchmarkEdgeSignal(b *testing.B) {
	for _, k := range []int{2, 3, 4, 8, 32} {
		ps := randomTable(k, 1)
		for _, c := range []struct {
			name string
			f    func(graphidx.PairStats, float64) (float64, float64)
		}{{"cramersV", cramersV}, {"maxCorrelation", maxCorrelation}} {
			b.Run(fmt.Sprintf("K=%d/%s", k, c.name), func(b *testing.B) {
				b.ReportAllocs()
				for b.Loop() {
					sinkSignal, _ = c.f(ps, 1)
				}
				if !(sinkSignal > 0 && sinkSignal <= 1) {
					b.Fatalf("signal %g outside (0, 1]", sinkSignal)
				}
			})
		}
	}
}

// TestMaxCorrelationPower: beyond exactLimit values the signal is the power
// iteration's lower bound: between V and the exact ρ_m (gonum's SVD), equal
// to it on a table with a dominant direction, and the same bits for (a, b)
// and (b, a).
func TestMaxCorrelationPower(t *testing.T) {
	t.Parallel()
	exact := func(ps graphidx.PairStats) float64 {
		ka, kb := ps.KA, ps.KB
		obs := make([]float64, ka*kb)
		row, col := make([]float64, ka), make([]float64, kb)
		n := 0.0
		for u := range ka {
			for v := range kb {
				x := float64(ps.Count(u, v)) + 1
				obs[u*kb+v] = x
				row[u] += x
				col[v] += x
				n += x
			}
		}
		q := mat.NewDense(ka, kb, nil)
		for u := range ka {
			for v := range kb {
				q.Set(u, v, obs[u*kb+v]/n/math.Sqrt(row[u]/n*col[v]/n))
			}
		}
		var svd mat.SVD
		if !svd.Factorize(q, mat.SVDNone) {
			t.Fatal("SVD failed")
		}
		return svd.Values(nil)[1]
	}
	rng := rand.New(rand.NewPCG(8, 8))
	for _, k := range []int{17, 24, 40} {
		for trial := range 4 {
			c := make([]uint32, k*k)
			for u := range k {
				for v := range k {
					x := rng.IntN(50)
					if trial%2 == 1 && (u < k/2) == (v < k/2) {
						x += 400 // a dominant two-block contrast
					}
					c[u*k+v] = uint32(x)
				}
			}
			ps := graphidx.NewPairStats(1, 2, k, k, c)
			got, _ := maxCorrelation(ps, 1)
			v, _ := cramersV(ps, 1)
			want := exact(ps)
			if !(got >= v-1e-12 && got <= want+1e-12) {
				t.Errorf("k %d trial %d: %g outside [V %g, ρ_m %g]", k, trial, got, v, want)
			}
			if trial%2 == 1 && math.Abs(got-want) > 1e-6 {
				t.Errorf("k %d dominant contrast: %g, ρ_m %g", k, got, want)
			}
			rev := graphidx.NewPairStats(2, 1, k, k, transpose(ps, k))
			if back, _ := maxCorrelation(rev, 1); back != got {
				t.Errorf("k %d trial %d: (a, b) %v, (b, a) %v", k, trial, got, back)
			}
		}
	}
}
