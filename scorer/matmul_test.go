package scorer

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestMatMulMatchesGonum checks that matMul is bit-identical to
// mat.Dense.Mul on chain-sized products (row vectors and K×2K blocks with
// strides, including zero entries that gonum skips), so switching Chain to
// it changes no estimate.
func TestMatMulMatchesGonum(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(7, 11))
	for trial := 0; trial < 2000; trial++ {
		r := 1 + rng.IntN(8)
		k := 1 + rng.IntN(8)
		n := 1 + rng.IntN(16)
		lda, ldb, ldc := k+rng.IntN(3), n+rng.IntN(3), n+rng.IntN(3)
		a := make([]float64, (r-1)*lda+k)
		b := make([]float64, (k-1)*ldb+n)
		for i := range a {
			if rng.IntN(5) > 0 {
				a[i] = rng.Float64()
			}
		}
		for i := range b {
			b[i] = rng.Float64() * math.Pow(10, float64(rng.IntN(7)-3))
		}
		got := make([]float64, (r-1)*ldc+n)
		for i := range got {
			got[i] = math.NaN() // must be overwritten
		}
		matMul(got, ldc, a, lda, b, ldb, r, k, n)
		var want mat.Dense
		want.Mul(dense(new(mat.Dense), a, r, k, lda), dense(new(mat.Dense), b, k, n, ldb))
		for i := 0; i < r; i++ {
			for j := 0; j < n; j++ {
				if g, w := got[i*ldc+j], want.At(i, j); math.Float64bits(g) != math.Float64bits(w) {
					t.Fatalf("trial %d (%d×%d·%d×%d): c[%d,%d] = %v, gonum %v", trial, r, k, k, n, i, j, g, w)
				}
			}
		}
	}
}
