package scorer

import "github.com/hopwise/hopwise/graphidx"

// rangeBound returns R, an upper bound of Σ_v (p_v − m_v)², the squared
// distance of the conditional p = P(t | s = u) from the target's marginal
// m = P(t), from the two marginals alone (Bayes' rule; see Bayes, "Range
// bound"). With P_u = P(s = u) and r = (1 − P_u)/P_u:
//
//	p_v = P(s = u | t = v)·m_v/P_u ≤ m_v/P_u,
//	1 − p_v = P(s = u | t ≠ v)·(1 − m_v)/P_u ≤ (1 − m_v)/P_u,
//
// so p_v − m_v ≤ U_v = min(1 − m_v, m_v·r) and m_v − p_v ≤ D_v = min(m_v,
// (1 − m_v)·r). The deviations sum to 0, so TV(p, m) ≤ min(Σ_v U_v, Σ_v D_v)
// and Σ_v (p_v − m_v)² ≤ min(Σ_v max(U_v, D_v)², 2·TV²). A target whose
// marginal puts little mass on some value can move far only when the
// observed value is rare: P(asia | smoke = yes) in ASIA is within 0.01 of
// P(asia) = 0.01 whatever the rest of the network, since P(smoke = yes) = 0.5.
//
// m and P_u are the smoothed marginals (α) of the index; ok is false without
// marginals of K_s and K_t entries. O(K_s + K_t), no allocation.
func (b *Bayes) rangeBound(st Stats, s graphidx.EntityID, u int, t graphidx.EntityID, kt int) (float64, bool) {
	ms, ok := st.(Marginals)
	if !ok {
		return 0, false
	}
	cs, ct := ms.Marginal(s), ms.Marginal(t)
	if u < 0 || u >= len(cs) || len(cs) != st.NumValues(s) || len(ct) != kt {
		return 0, false
	}
	pu := smoothedShare(cs, u, b.alpha)
	if !(pu > 0) {
		return 0, false
	}
	r := (1 - pu) / pu
	tott := float64(kt) * b.alpha
	for _, x := range ct {
		tott += float64(x)
	}
	var sq, up, down float64
	for _, x := range ct {
		m := (float64(x) + b.alpha) / tott
		uv, dv := min(1-m, m*r), min(m, (1-m)*r)
		up += uv
		down += dv
		d := max(uv, dv)
		sq += d * d
	}
	tv := min(up, down)
	return min(sq, 2*tv*tv), true
}

// smoothedShare returns (c_u + α)/(Σ c + K α), the smoothed share of value u
// among the counts c. O(K).
func smoothedShare(c []uint64, u int, alpha float64) float64 {
	tot := float64(len(c)) * alpha
	for _, x := range c {
		tot += float64(x)
	}
	return (float64(c[u]) + alpha) / tot
}
