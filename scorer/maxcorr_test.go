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
