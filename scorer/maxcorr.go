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
// The largest eigenvalue of G (k×k, k = min(K_a, K_b)) comes from its
// characteristic polynomial for k = 3 and 4 (G is singular, so a quadratic
// and a cubic; see gramMaxEigen) and from cyclic Jacobi rotations beyond
// (Golub & Van Loan, Matrix Computations, 4th ed. §8.5); the result is at
// least V (rounding), at most 1. A table with a binary side returns cramersV
// exactly. Cost O(K_a·K_b·k) for G, O(1) for the closed forms, O(k³) per
// Jacobi sweep (a handful); no allocation.
// gramSmall is the most values per side for which maxCorrelation uses small
// buffers (8×8; clearing 64×64 ones costs about 1 µs per call, more than the
// whole computation at K = 3–4); larger tables use buffers of the largest
// size.
const gramSmall = 8

func maxCorrelation(ps graphidx.PairStats, alpha float64) (rho, n float64) {
	ka, kb := ps.KA, ps.KB
	if ka == 2 || kb == 2 {
		return cramersV(ps, alpha)
	}
	// k ≤ c: G = Q̃Q̃ᵀ is formed over the smaller side; cell (i, w) of the
	// oriented table is Count(i, w), or Count(w, i) when transposed.
	k, c := ka, kb
	if kb < ka {
		k, c = kb, ka
	}
	if c <= gramSmall {
		var cells [gramSmall * gramSmall]float64
		var vecs [5 * gramSmall]float64
		var g [gramSmall * gramSmall]float64
		return maxCorrelationIn(ps, alpha, k, c, cells[:k*c], vecs[:5*c], g[:k*k])
	}
	return maxCorrelationLarge(ps, alpha, k, c)
}

// maxCorrelationLarge is maxCorrelation for more than gramSmall values on a
// side, with buffers of the largest size (64 KiB of stack, cleared per call:
// about 1 µs, small beside the Jacobi sweeps at that size). No allocation.
func maxCorrelationLarge(ps graphidx.PairStats, alpha float64, k, c int) (rho, n float64) {
	var cells [graphidx.MaxValues * graphidx.MaxValues]float64
	var vecs [5 * graphidx.MaxValues]float64
	var g [graphidx.MaxValues * graphidx.MaxValues]float64
	return maxCorrelationIn(ps, alpha, k, c, cells[:k*c], vecs[:5*c], g[:k*k])
}

// maxCorrelationIn is maxCorrelation with its buffers: cells (k·c), vecs
// (5·c) and g (k·k), all zero. O(k·c·k) plus gramMaxEigen.
func maxCorrelationIn(ps graphidx.PairStats, alpha float64, k, c int, cells, vecs, g []float64) (rho, n float64) {
	tr := ps.KB < ps.KA
	ri, ci, pr, pc, d := vecs[:k], vecs[c:2*c], vecs[2*c:2*c+k], vecs[3*c:4*c], vecs[4*c:4*c+k]
	// The smoothed cells N + α, read once, and the marginals.
	for i := 0; i < k; i++ {
		for w := 0; w < c; w++ {
			var x uint32
			if tr {
				x = ps.Count(w, i)
			} else {
				x = ps.Count(i, w)
			}
			v := float64(x) + alpha
			cells[i*c+w] = v
			ri[i] += v
			ci[w] += v
			n += v
		}
	}
	inv := 1 / n
	for i := range ri {
		pr[i] = ri[i] * inv
		ri[i] = 1 / math.Sqrt(pr[i])
	}
	for w := range ci {
		pc[w] = ci[w] * inv
		ci[w] = 1 / math.Sqrt(pc[w])
	}
	// G += d dᵀ, one column d = Q̃[:, w] at a time: Q̃ is never stored.
	for w := 0; w < c; w++ {
		for i := range d {
			d[i] = (cells[i*c+w]*inv - pr[i]*pc[w]) * ri[i] * ci[w]
		}
		for i, di := range d {
			gi := g[i*k : i*k+k]
			for j, dj := range d {
				gi[j] += di * dj
			}
		}
	}
	// V² = tr G/(k − 1), the lower end of ρ_m² (rounding may put the
	// eigenvalue a hair below it).
	trace := 0.0
	for i := 0; i < k; i++ {
		trace += g[i*k+i]
	}
	v2 := trace / float64(k-1)
	lam := gramMaxEigen(g, k)
	return min(math.Sqrt(max(0, lam, v2)), 1), n
}

// gramMaxEigen returns the largest eigenvalue of the k×k Gram matrix g of
// maxCorrelation (symmetric, positive semi-definite, and singular: √p_u of
// the smaller side is in its kernel, since Σ_u √p_u·Q̃_uv = 0). With e_j the
// sum of its j×j principal minors (e_1 the trace), the other eigenvalues are
// the roots of λ^(k−1) − e_1 λ^(k−2) + e_2 λ^(k−3) − …, so
//
//	k = 3:  λ_max = (e_1 + √(e_1² − 4e_2))/2,
//	k = 4:  λ_max = m + 2√a·cos(acos(b/a^(3/2))/3),  m = e_1/3,
//	        a = m² − e_2/3, b = m³ − m·e_2/2 + e_3/2
//
// (the trigonometric solution of a cubic with three real roots; Smith 1961,
// "Eigenvalues of a symmetric 3 × 3 matrix", Commun. ACM 4(4)); larger k by
// jacobiMaxEigen. g may be overwritten. O(k³), no allocation.
func gramMaxEigen(g []float64, k int) float64 {
	switch k {
	case 3:
		e1 := g[0] + g[4] + g[8]
		e2 := g[0]*g[4] - g[1]*g[1] + g[0]*g[8] - g[2]*g[2] + g[4]*g[8] - g[5]*g[5]
		return (e1 + math.Sqrt(max(0, e1*e1-4*e2))) / 2
	case 4:
		var e1, e2, e3 float64
		for i := 0; i < 4; i++ {
			e1 += g[i*5]
			for j := i + 1; j < 4; j++ {
				e2 += g[i*5]*g[j*5] - g[i*4+j]*g[i*4+j]
				for l := j + 1; l < 4; l++ {
					// det of the principal minor on {i, j, l}
					a, b, c := g[i*4+i], g[i*4+j], g[i*4+l]
					d, e, f := g[j*4+j], g[j*4+l], g[l*4+l]
					e3 += a*(d*f-e*e) - b*(b*f-e*c) + c*(b*e-d*c)
				}
			}
		}
		m := e1 / 3
		a := m*m - e2/3
		if !(a > 0) {
			return m
		}
		b := m*m*m - m*e2/2 + e3/2
		c := max(-1, min(1, b/(a*math.Sqrt(a))))
		return m + 2*math.Sqrt(a)*math.Cos(math.Acos(c)/3)
	}
	return jacobiMaxEigen(g, k)
}

// jacobiMaxEigen returns the largest eigenvalue of the symmetric k×k matrix
// a (row-major), which it overwrites, by cyclic Jacobi rotations (Golub &
// Van Loan §8.5.3): sweeps until the off-diagonal mass is below 10⁻²⁴ of the
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
		if !(off > 1e-24*tot) {
			break
		}
		jacobiSweep(a, k)
	}
	best := math.Inf(-1)
	for i := 0; i < k; i++ {
		best = max(best, a[i*k+i])
	}
	return best
}

// jacobiSweep applies one cyclic sweep of Jacobi rotations to the symmetric
// k×k matrix a (row-major), each zeroing one off-diagonal pair (the
// symmetric Schur decomposition, Golub & Van Loan Alg. 8.5.1). O(k³).
func jacobiSweep(a []float64, k int) {
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
