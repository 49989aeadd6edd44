package world

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
)

// Geometric is the geometric distribution on {0, 1, 2, …} counting failures
// before the first success: pmf p(1−p)^k, mean (1−p)/p, variance (1−p)/p²
// (common practice; the mean is the check of docs/DESIGN.md, External checks).
type Geometric struct {
	P float64 // success probability, in (0, 1]
}

func (g Geometric) check() error {
	if !(g.P > 0 && g.P <= 1) {
		return fmt.Errorf("%w: geometric p = %v, want (0, 1]", ErrInvalidConfig, g.P)
	}
	return nil
}

// PMF returns P(K = k); 0 for k < 0.
func (g Geometric) PMF(k int) float64 {
	if k < 0 {
		return 0
	}
	return g.P * math.Pow(1-g.P, float64(k))
}

// Mean returns (1−p)/p.
func (g Geometric) Mean() float64 { return (1 - g.P) / g.P }

// Rand draws by inversion: ⌊ln U / ln(1−p)⌋ with U uniform on (0, 1]. O(1).
func (g Geometric) Rand(r *rand.Rand) int {
	if g.P >= 1 {
		return 0
	}
	u := 1 - r.Float64() // (0, 1]
	k := math.Floor(math.Log(u) / math.Log1p(-g.P))
	if k > math.MaxInt32 {
		return math.MaxInt32
	}
	return int(k)
}

// Zipf is the finite Zipf distribution on {1, …, N} with exponent S:
// pmf 1 / (H_(N,S) k^S), where H_(N,S) = Σ_(i=1..N) i^(−S) is the
// generalised harmonic number (docs/DESIGN.md, External checks).
type Zipf struct {
	s   float64
	cdf []float64 // cdf[k−1] = P(K ≤ k)
	h   float64
}

// NewZipf returns the finite Zipf distribution on {1..n} with exponent s ≥ 0.
// Construction is O(n); Rand is O(log n).
func NewZipf(s float64, n int) (*Zipf, error) {
	if n < 1 {
		return nil, fmt.Errorf("%w: zipf n = %d, want ≥ 1", ErrInvalidConfig, n)
	}
	if !(s >= 0) || math.IsInf(s, 0) {
		return nil, fmt.Errorf("%w: zipf s = %v, want finite ≥ 0", ErrInvalidConfig, s)
	}
	z := &Zipf{s: s, cdf: make([]float64, n)}
	acc := 0.0
	for k := 1; k <= n; k++ {
		acc += math.Pow(float64(k), -s)
		z.cdf[k-1] = acc
	}
	z.h = acc
	for i := range z.cdf {
		z.cdf[i] /= acc
	}
	z.cdf[n-1] = 1
	return z, nil
}

// N returns the largest value of the support.
func (z *Zipf) N() int { return len(z.cdf) }

// Harmonic returns H_(N,S).
func (z *Zipf) Harmonic() float64 { return z.h }

// PMF returns P(K = k); 0 outside {1..N}.
func (z *Zipf) PMF(k int) float64 {
	if k < 1 || k > len(z.cdf) {
		return 0
	}
	return math.Pow(float64(k), -z.s) / z.h
}

// Rand draws by inversion of the tabulated CDF.
func (z *Zipf) Rand(r *rand.Rand) int {
	u := r.Float64() // [0, 1)
	return 1 + sort.Search(len(z.cdf), func(i int) bool { return z.cdf[i] > u })
}
