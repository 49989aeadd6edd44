package scorer

import (
	"math"

	"github.com/hopwise/hopwise/graphidx"
)

// gramSmall is the most values per side for which maxCorrelation uses small
// buffers (8×8; clearing 64×64 ones costs about 1 µs per call, more than the
// whole computation at K = 3–4); larger tables use buffers of the largest
// size.
const gramSmall = 8

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
// and a cubic; see gramMaxEigen), from Householder tridiagonalisation and
// bisection up to exactLimit values (symMaxEigen; Golub & Van Loan, Matrix
// Computations, 4th ed. §8.3–8.4), and beyond as a lower bound by power
// iteration (maxCorrelationPower); the result is at least V (rounding), at
// most 1. A table with a binary side returns cramersV exactly. Cost
// O(K_a·K_b·k) for G, O(1) for the closed forms, O(k³) up to exactLimit,
// O(K_a·K_b) per power step beyond; no allocation.
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
	if c <= exactLimit {
		return maxCorrelationMedium(ps, alpha, k, c)
	}
	return maxCorrelationLarge(ps, alpha, k, c)
}

// maxCorrelationMedium is maxCorrelation for gramSmall < c ≤ exactLimit,
// with 16×16 buffers (4 KiB of stack). No allocation.
func maxCorrelationMedium(ps graphidx.PairStats, alpha float64, k, c int) (rho, n float64) {
	var cells [exactLimit * exactLimit]float64
	var vecs [5 * exactLimit]float64
	var g [exactLimit * exactLimit]float64
	return maxCorrelationIn(ps, alpha, k, c, cells[:k*c], vecs[:5*c], g[:k*k])
}

// exactLimit is the most values on the smaller side for which
// maxCorrelation computes ρ_m exactly (O(k³), 2 µs at k = 8); beyond it
// (maxCorrelationPower) a lower bound in O(k·c) per step.
const exactLimit = 16

// powerSteps bounds maxCorrelationPower.
const powerSteps = 16

// maxCorrelationPower returns a lower bound of ρ_m for k > exactLimit: it
// turns cells (the smoothed k×c table, row-major) into Q̃ in place and runs
// power iteration on Q̃Q̃ᵀ without forming it (x ← Q̃(Q̃ᵀx), Golub & Van
// Loan §8.2.1) from the row of Q̃ of largest norm, at most powerSteps steps,
// stopping when ‖Q̃ᵀx‖² (the Rayleigh quotient, never above ρ_m²) changes
// by less than 10⁻¹² (relative). The result is at least V and at most ρ_m,
// equal to it up to (σ₂/σ₁)^(2·steps): a lower bound of the signal, as the
// signal bound wants. x (k) and y (c) are scratch. O(k·c) per step, no
// allocation.
func maxCorrelationPower(cells []float64, k, c int, inv float64, ri, ci, pr, pc, x, y []float64) float64 {
	trace, best, bi := 0.0, -1.0, 0
	for i := 0; i < k; i++ {
		row := cells[i*c : i*c+c]
		s := 0.0
		for w := range row {
			q := (row[w]*inv - pr[i]*pc[w]) * ri[i] * ci[w]
			row[w] = q
			s += q * q
		}
		trace += s
		if s > best {
			best, bi = s, i
		}
	}
	v2 := trace / float64(k-1)
	if !(best > 0) {
		return 0
	}
	// x = e_bi: its quotient is the row's squared norm.
	clear(x)
	x[bi] = 1
	lam := best
	for step := range powerSteps + 1 {
		// y = Q̃ᵀx, then x = Q̃y normalised; ‖y‖² is xᵀGx for ‖x‖ = 1.
		clear(y)
		for i, xi := range x {
			if xi == 0 {
				continue
			}
			for w, q := range cells[i*c : i*c+c] {
				y[w] += xi * q
			}
		}
		yy := 0.0
		for _, yw := range y {
			yy += yw * yw
		}
		// Step 0 only recomputes the start's quotient.
		done := step > 0 && math.Abs(yy-lam) <= 1e-12*yy
		lam = max(lam, yy)
		if done || step == powerSteps {
			break
		}
		xx := 0.0
		for i := range x {
			s := 0.0
			for w, q := range cells[i*c : i*c+c] {
				s += q * y[w]
			}
			x[i] = s
			xx += s * s
		}
		if !(xx > 0) {
			break
		}
		xn := 1 / math.Sqrt(xx)
		for i := range x {
			x[i] *= xn
		}
	}
	return min(math.Sqrt(max(lam, v2)), 1)
}

// maxCorrelationLarge is maxCorrelation for more than exactLimit values on
// a side, with buffers of the largest size (64 KiB of stack, cleared per call:
// about 1 µs, small beside the O(k³) eigenvalue at that size). No
// allocation.
func maxCorrelationLarge(ps graphidx.PairStats, alpha float64, k, c int) (rho, n float64) {
	var cells [graphidx.MaxValues * graphidx.MaxValues]float64
	var vecs [5 * graphidx.MaxValues]float64
	var g [graphidx.MaxValues * graphidx.MaxValues]float64
	return maxCorrelationIn(ps, alpha, k, c, cells[:k*c], vecs[:5*c], g[:k*k])
}

// maxCorrelationIn is maxCorrelation with its buffers: cells (k·c), vecs
// (5·c) and g (k·k), all zero. O(k·c·k) plus gramMaxEigen.
func maxCorrelationIn(ps graphidx.PairStats, alpha float64, k, c int, cells, vecs, g []float64) (rho, n float64) {
	// Rows are the smaller side; a square table puts the smaller entity id
	// first, so (a, b) and (b, a) run the same arithmetic.
	tr := ps.KB < ps.KA || (ps.KB == ps.KA && ps.B < ps.A)
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
	if k > exactLimit {
		return maxCorrelationPower(cells, k, c, inv, ri, ci, pr, pc, d, vecs[c:2*c]), n
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
// symMaxEigen. O(1) for k ≤ 4, O(k³) beyond, no allocation.
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
	return symMaxEigen(g, k)
}

// symMaxEigen returns the largest eigenvalue of the symmetric k×k matrix g
// (row-major; its lower triangle is overwritten): Householder reduction to a
// tridiagonal matrix (Golub & Van Loan §8.3.1; the EISPACK tred1 ordering,
// Wilkinson & Reinsch 1971), then bisection on the Sturm sequence of the
// tridiagonal matrix (Golub & Van Loan §8.4.1) between the trace/(k − 1)
// bound below (g is singular, so the largest of the k − 1 others is at
// least their mean) and Gershgorin's bound above, to 10⁻¹⁵ relative.
// O(4k³/3) for the reduction, O(k) per bisection step (about 50), no
// allocation.
func symMaxEigen(g []float64, k int) float64 {
	var db, eb [graphidx.MaxValues]float64
	d, e := db[:k], eb[:k]
	trace := 0.0
	for i := 0; i < k; i++ {
		trace += g[i*k+i]
	}
	for i := k - 1; i > 0; i-- {
		l := i - 1
		ai := g[i*k : i*k+k]
		if l == 0 {
			e[i] = ai[0]
			continue
		}
		scale := 0.0
		for c := 0; c <= l; c++ {
			scale += math.Abs(ai[c])
		}
		if scale == 0 {
			e[i] = ai[l]
			continue
		}
		h := 0.0
		for c := 0; c <= l; c++ {
			ai[c] /= scale
			h += ai[c] * ai[c]
		}
		f := ai[l]
		gg := math.Sqrt(h)
		if f >= 0 {
			gg = -gg
		}
		e[i] = scale * gg
		h -= f * gg
		ai[l] = f - gg
		f = 0
		for j := 0; j <= l; j++ {
			s := 0.0
			for c := 0; c <= j; c++ {
				s += g[j*k+c] * ai[c]
			}
			for c := j + 1; c <= l; c++ {
				s += g[c*k+j] * ai[c]
			}
			e[j] = s / h
			f += e[j] * ai[j]
		}
		hh := f / (h + h)
		for j := 0; j <= l; j++ {
			f = ai[j]
			gj := e[j] - hh*f
			e[j] = gj
			for c := 0; c <= j; c++ {
				g[j*k+c] -= f*e[c] + gj*ai[c]
			}
		}
	}
	for i := 0; i < k; i++ {
		d[i] = g[i*k+i]
	}
	e[0] = 0
	// Bisection for the largest eigenvalue of the tridiagonal (d, e).
	hi := 0.0
	for i := 0; i < k; i++ {
		r := math.Abs(e[i])
		if i+1 < k {
			r += math.Abs(e[i+1])
		}
		hi = max(hi, d[i]+r)
	}
	hi = min(hi, trace)
	lo := max(0, trace/float64(k-1))
	if !(hi > lo) {
		return max(lo, hi)
	}
	// below(x) counts the eigenvalues below x (Sturm sequence).
	below := func(x float64) int {
		n := 0
		q := 1.0
		for i := 0; i < k; i++ {
			if q == 0 {
				q = 1e-300
			}
			q = d[i] - x - e[i]*e[i]/q
			if q < 0 {
				n++
			}
		}
		return n
	}
	for range 200 {
		mid := (lo + hi) / 2
		if !(mid > lo && mid < hi) || hi-lo <= 1e-15*hi {
			break
		}
		if below(mid) == k {
			hi = mid // every eigenvalue below mid
		} else {
			lo = mid
		}
	}
	return (lo + hi) / 2
}
