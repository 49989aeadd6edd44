package scorer

import (
	"math"

	"github.com/hopwise/hopwise/graphidx"
)

// maxCorrelation returns the maximal correlation ρ_m of the posterior-mean
// joint table of ps (the same table as cramersV: p_uv = (N_uv + α)/n) and
// the effective count n = support + K_a·K_b·α. 2 ≤ K_a, K_b ≤
// graphidx.MaxValues.
//
// ρ_m(A; B) = sup Corr(f(A), g(B)) over all functions f, g of finite
// variance (Hirschfeld 1935, Gebelein 1941, Rényi 1959 "On measures of
// dependence") is the second largest singular value of the K_a×K_b matrix
// Q_uv = p_uv/√(p_u p_v) (the largest is 1, for the vectors √p_u and √p_v;
// Witsenhausen 1975, "On sequences of pairs of dependent random variables",
// SIAM J. Appl. Math. 28). So ρ_m² is the largest eigenvalue of G = Q̃Q̃ᵀ,
// Q̃_uv = (p_uv − p_u p_v)/√(p_u p_v), whose trace is Σ_i σ_i² = χ²/n =
// (min(K_a, K_b) − 1)·V² (V Cramér's V), so
//
//	V ≤ ρ_m ≤ √(min(K_a, K_b) − 1)·V,
//
// with equality on the left whenever min(K_a, K_b) = 2 (Q̃ has rank 1): for
// binary entities ρ_m = V = |φ|, and this function returns cramersV exactly.
// Why it is the signal of an edge: along a Markov chain A – B – C, Q_AC =
// Q_AB·Q_BC, hence ρ_m(A; C) ≤ ρ_m(A; B)·ρ_m(B; C) (data processing for the
// maximal correlation; Witsenhausen 1975), the product rule that the
// missing-signal term and the edge cost assume. V² is the mean of the K − 1
// squared singular values, so a dependence carried along one direction of a
// K-valued entity (a rank-one channel) reads V = ρ_m/√(K − 1): 0.58·ρ_m per
// edge at K = 4, 0.33·ρ_m over a two-edge chain, which made well-supported
// chains of multi-valued networks look like chains without signal.
//
// G (k×k, k = min(K_a, K_b)) is diagonalised by cyclic Jacobi rotations
// (Golub & Van Loan, Matrix Computations, 4th ed. §8.5), which converge
// quadratically and need no starting vector; the result is the largest
// diagonal entry, at least V² (rounding), at most 1. Cost O(K_a·K_b·k) for G
// plus O(k³) per sweep (a handful of sweeps), no allocation.
func maxCorrelation(ps graphidx.PairStats, alpha float64) (rho, n float64) {
	ka, kb := ps.KA, ps.KB
	v, n := cramersV(ps, alpha)
	if ka == 2 || kb == 2 {
		return v, n
	}
	var row, col [graphidx.MaxValues]float64
	for u := 0; u < ka; u++ {
		for w := 0; w < kb; w++ {
			c := float64(ps.Count(u, w))
			row[u] += c
			col[w] += c
		}
	}
	inv := 1 / n
	for u := 0; u < ka; u++ {
		row[u] = (row[u] + float64(kb)*alpha) * inv
	}
	for w := 0; w < kb; w++ {
		col[w] = (col[w] + float64(ka)*alpha) * inv
	}
	// q holds Q̃ with the smaller side as rows: k×c.
	k, c := ka, kb
	if kb < ka {
		k, c = kb, ka
	}
	var q [graphidx.MaxValues * graphidx.MaxValues]float64
	for u := 0; u < ka; u++ {
		for w := 0; w < kb; w++ {
			e := row[u] * col[w]
			d := ((float64(ps.Count(u, w))+alpha)*inv - e) / math.Sqrt(e)
			if kb < ka {
				q[w*c+u] = d
			} else {
				q[u*c+w] = d
			}
		}
	}
	var g [graphidx.MaxValues * graphidx.MaxValues]float64
	for i := 0; i < k; i++ {
		for j := i; j < k; j++ {
			s := 0.0
			for w := 0; w < c; w++ {
				s += q[i*c+w] * q[j*c+w]
			}
			g[i*k+j], g[j*k+i] = s, s
		}
	}
	lam := jacobiMaxEigen(g[:k*k], k)
	rho = max(v, math.Sqrt(max(0, lam)))
	return min(rho, 1), n
}

// jacobiMaxEigen returns the largest eigenvalue of the symmetric k×k matrix
// a (row-major), which it overwrites, by cyclic Jacobi rotations (Golub &
// Van Loan §8.5.3): sweeps until the off-diagonal mass is below 10⁻³⁰ of the
// total (or 30 sweeps). O(k³) per sweep, no allocation.
func jacobiMaxEigen(a []float64, k int) float64 {
	for range 30 {
		off, tot := 0.0, 0.0
		for i := 0; i < k; i++ {
			for j := 0; j < k; j++ {
				x := a[i*k+j] * a[i*k+j]
				tot += x
				if i != j {
					off += x
				}
			}
		}
		if !(off > 1e-30*tot) {
			break
		}
		for p := 0; p < k-1; p++ {
			for r := p + 1; r < k; r++ {
				apr := a[p*k+r]
				if apr == 0 {
					continue
				}
				// The rotation (c, s) that zeroes a[p][r] (the symmetric
				// Schur decomposition, Golub & Van Loan Alg. 8.5.1).
				tau := (a[r*k+r] - a[p*k+p]) / (2 * apr)
				t := 1 / (math.Abs(tau) + math.Sqrt(1+tau*tau))
				if tau < 0 {
					t = -t
				}
				cs := 1 / math.Sqrt(1+t*t)
				sn := t * cs
				for i := 0; i < k; i++ { // columns p, r
					aip, air := a[i*k+p], a[i*k+r]
					a[i*k+p], a[i*k+r] = cs*aip-sn*air, sn*aip+cs*air
				}
				for i := 0; i < k; i++ { // rows p, r
					api, ari := a[p*k+i], a[r*k+i]
					a[p*k+i], a[r*k+i] = cs*api-sn*ari, sn*api+cs*ari
				}
			}
		}
	}
	best := math.Inf(-1)
	for i := 0; i < k; i++ {
		best = max(best, a[i*k+i])
	}
	return best
}
