package scorer

import (
	"math"

	"github.com/hopwise/hopwise/graphidx"
)

// DefaultSignalZ is z of the Bayes model's edge cost (WithSignalZ): the
// association of an edge is discounted by z standard errors, z/√n, before
// its logarithm is taken. z = 2 is a conventional one-sided lower bound
// (about 97.7 % under a normal approximation; common practice).
const DefaultSignalZ = 2.0

// signalFloor is ε of the edge cost: the association lower bound is clamped
// to [ε, 1], so an edge cost lies in [0, −log ε] = [0, MaxEdgeCost].
const signalFloor = 1e-12

// MaxEdgeCost is the Bayes model's edge cost of an edge that carries no
// usable signal (−log 10⁻¹²): an entity with a single value, or an
// association not distinguishable from zero at the configured z.
var MaxEdgeCost = -math.Log(signalFloor)

// EdgeCost is the signal-loss proxy of the edge (a, b) used to generate
// chain candidates (docs/DESIGN.md, Bridge search):
//
//	cost = −log max(ε, ρ̂ − z/√n),   ε = 10⁻¹², n = support + K_a·K_b·α,
//
// where ρ̂ is the maximal correlation (Hirschfeld–Gebelein–Rényi) of the
// posterior-mean joint table p_uv = (N_uv + α)/(N + K_a K_b α) (a symmetric
// Dirichlet(α) over the K_a·K_b cells; Gelman et al., BDA 3rd ed. §3.4):
// the second singular value of p_uv/√(p_u p_v) (see maxCorrelation). When
// an entity is binary it equals Cramér's V (Cramér 1946, Mathematical
// Methods of Statistics) of that table,
//
//	V̂ = sqrt( Σ_uv (p_uv − p_u p_v)² / (p_u p_v) / (min(K_a, K_b) − 1) ),
//
// and for 2×2 tables |φ|, computed as such.
//
// Why: for binary variables |φ| is the absolute correlation, and along a
// Markov chain the correlation of the endpoints is the product of the edge
// correlations. In a tree-structured model the true path between two nodes
// maximises the product of |correlations| over all paths: every edge of any
// other path has a correlation that is itself a product along the tree path
// between its ends, all factors ≤ 1, and those tree paths together cover
// the true path. This is the argument behind the maximum-weight spanning
// trees of Chow & Liu (1968). For K > 2 values the maximal correlation
// keeps the product rule as a bound, ρ_m(a; c) ≤ ρ_m(a; b)·ρ_m(b; c) along
// a Markov chain (Witsenhausen 1975); Cramér's V, the root mean square of
// the K − 1 singular values, does not, and reads a dependence carried along
// one direction √(K − 1) times too weak per edge. So Σ_k −log ρ_k is an
// additive cost whose minimum is the chain that keeps the most signal, and
// the k cheapest chains are the candidates worth scoring. Subtracting z/√n
// turns ρ̂ into a lower confidence bound — the standard error of φ under
// independence is about 1/√n, and so is the first-order error of a simple
// singular value (common practice) — so that edges of little support do
// not look strong by chance.
//
// The cost is symmetric: (a, b) and (b, a) give the same value (bit for bit
// for 2×2 tables, up to rounding otherwise). The result is ≥ 0 (ρ̂ ≤ 1) and
// at most MaxEdgeCost, which is also the
// cost of an edge with K_a or K_b < 2 (presence-only entities carry no
// signal to rank by). It is not monotone in support. O(K_a·K_b) with a
// binary side, O(K_a·K_b·k + k³) otherwise (k = min(K_a, K_b); closed
// forms for k = 3 and 4; beyond 16 values a power-iteration lower bound in
// O(K_a·K_b) per step), no allocation. Measured (BenchmarkEdgeSignal, one
// run, shared machine): 150 ns at K = 3, 300 ns at K = 4, 1.9 µs at K = 8,
// 23 µs at K = 32, against Cramér's V's 80, 116, 347 ns and 4.9 µs; binary
// tables unchanged.
func (b *Bayes) EdgeCost(ps graphidx.PairStats) float64 { return edgeCostOf(b.signalBound(ps, true)) }

// EdgeCostBound returns EdgeCost(ps) and the signal bound lb it is −log
// of (SignalBound(ps)), computed once. A Stats that keeps lb with the pair
// can hand it back to the model's chain score (KnownSignalBounder) instead
// of the model computing it again. Same cost as EdgeCost.
func (b *Bayes) EdgeCostBound(ps graphidx.PairStats) (cost, lb float64) {
	lb = b.signalBound(ps, true)
	return edgeCostOf(lb), lb
}

// edgeCostOf is EdgeCost of an edge whose signal bound is lb.
func edgeCostOf(lb float64) float64 {
	if !(lb > signalFloor) { // also catches NaN
		return MaxEdgeCost
	}
	if lb >= 1 {
		return 0
	}
	return -math.Log(lb)
}

// signalBound returns the edge's association lower bound ρ̂ − z/√n of
// EdgeCost clamped to [0, 1]; 0 for an edge never observed (ok false), an
// entity with fewer than 2 values, or NaN. O(K_a·K_b).
func (b *Bayes) signalBound(ps graphidx.PairStats, ok bool) float64 {
	ka, kb := ps.KA, ps.KB
	if !ok || ka < 2 || kb < 2 || ka > graphidx.MaxValues || kb > graphidx.MaxValues {
		return 0
	}
	var v, n float64
	if ka == 2 || kb == 2 {
		v, n = cramersV(ps, b.alpha) // ρ_m = V with a binary side
	} else {
		v, n = maxCorrelation(ps, b.alpha)
	}
	lb := v - b.signalZ/math.Sqrt(n)
	if !(lb > 0) {
		return 0
	}
	return min(lb, 1)
}

// SignalBound returns the association lower bound max(0, min(1, ρ̂ − z/√n))
// of the edge ps (see EdgeCost, whose cost is −log of it): 0 when the
// association is not distinguishable from zero or an entity has fewer than
// 2 values. The product of the bounds along a chain is the signal L of the
// missing-signal bias. O(K_a·K_b), no allocation.
func (b *Bayes) SignalBound(ps graphidx.PairStats) float64 { return b.signalBound(ps, true) }

// missingSignal returns the missing-signal bias γ·(δ − L)₊² of a chain
// whose edges have the signal lower bounds lbs, L = Π_k lbs[k]. O(m).
func (b *Bayes) missingSignal(lbs []float64) float64 {
	l := 1.0
	for _, x := range lbs {
		l *= x
	}
	d := b.delta - l
	if d <= 0 {
		return 0
	}
	return b.gamma * d * d
}

// cramersV returns Cramér's V of the posterior-mean joint table of ps (see
// Bayes.EdgeCost) and the effective count n = support + K_a·K_b·α.
// 2 ≤ K_a, K_b ≤ graphidx.MaxValues. O(K_a·K_b), no allocation.
func cramersV(ps graphidx.PairStats, alpha float64) (v, n float64) {
	ka, kb := ps.KA, ps.KB
	if ka == 2 && kb == 2 {
		// V = |φ| = |ad − bc| / √((a+b)(c+d)(a+c)(b+d)) on the smoothed
		// cells (scale-free, so counts + α serve as well as probabilities).
		a := float64(ps.Count(0, 0)) + alpha
		b := float64(ps.Count(0, 1)) + alpha
		c := float64(ps.Count(1, 0)) + alpha
		d := float64(ps.Count(1, 1)) + alpha
		// Grouped so that the transposed table gives bit-identical results.
		v = math.Abs(a*d-b*c) / math.Sqrt(((a+b)*(c+d))*((a+c)*(b+d)))
		return min(v, 1), (a + d) + (b + c)
	}
	var row, col [graphidx.MaxValues]float64
	var tot uint64
	for u := 0; u < ka; u++ {
		var r uint64
		for w := 0; w < kb; w++ {
			c := uint64(ps.Count(u, w))
			r += c
			col[w] += float64(c)
		}
		row[u] = float64(r)
		tot += r
	}
	n = float64(tot) + float64(ka*kb)*alpha
	inv := 1 / n
	// Marginals of the posterior-mean table: p_u = (row_u + K_b α)/n.
	for u := 0; u < ka; u++ {
		row[u] = (row[u] + float64(kb)*alpha) * inv
	}
	for w := 0; w < kb; w++ {
		col[w] = (col[w] + float64(ka)*alpha) * inv
	}
	chi := 0.0
	for u := 0; u < ka; u++ {
		pu := row[u]
		for w := 0; w < kb; w++ {
			e := pu * col[w]
			d := (float64(ps.Count(u, w))+alpha)*inv - e
			chi += d * d / e
		}
	}
	v = math.Sqrt(chi / float64(min(ka, kb)-1))
	return min(v, 1), n
}

// ReferenceBias returns Σ_v (est_v − ref_v)², the squared distance of a
// chain's estimate from a reference estimate of the same target, used as
// the chain's squared-bias term in the router's error model
//
//	Err_c = Σ_v Var(p̂_c,v) + β·m_c + ReferenceBias(p̂_c, ref).
//
// The reference is an estimate believed to carry little screening-off bias:
// the direct estimate when the pair was ever observed together (its own
// counts are not chained), otherwise the chain that keeps the most signal
// (smallest Σ EdgeCost). A chain that does not screen the endpoints off
// typically loses signal, and its estimate drifts toward the target's
// marginal; the variance alone would favour it (a weak chain varies
// little), the distance from the reference does not. For unbiased, independent
// estimates E[ReferenceBias] = Σ Var(p̂_c) + Σ Var(ref) > 0, so the term also
// over-counts noise: it is a conservative (upward) estimate of bias². The
// result is ≥ 0, and 0 for the reference itself. When the lengths differ the
// estimates are not comparable and +Inf is returned. O(K), no allocation.
func ReferenceBias(est, ref []float64) float64 {
	if len(est) != len(ref) {
		return math.Inf(1)
	}
	s := 0.0
	for v, p := range est {
		d := p - ref[v]
		s += d * d
	}
	return s
}
