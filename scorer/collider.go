package scorer

import (
	"math"

	"github.com/hopwise/hopwise/graphidx"
	"gonum.org/v1/gonum/stat/distuv"
)

// Sizes and level of the common-effect (collider) test of the influence
// bound (see Bayes, "Influence bound"): ColliderTests is the most (w, p)
// tables read per direct estimate to test whether a neighbour w of the
// observed entity is a common effect of it and of another neighbour p;
// ColliderLevel is the significance level α of each of its χ² tests (0.01,
// common practice for the independence tests of constraint-based
// structure learning; not fitted).
const (
	ColliderTests = 4
	ColliderLevel = 0.01
)

// chi2Crit[d] is the (1 − ColliderLevel) quantile of the χ² distribution
// with d degrees of freedom, d = 1..graphidx.MaxValues−1 (gonum's
// stat/distuv).
var chi2Crit = func() [graphidx.MaxValues]float64 {
	var c [graphidx.MaxValues]float64
	for d := 1; d < graphidx.MaxValues; d++ {
		c[d] = distuv.ChiSquared{K: float64(d)}.Quantile(1 - ColliderLevel)
	}
	return c
}()

// rowFit returns Pearson's X² = Σ_v (N_v − n·q_v)²/(n·q_v) of the n counts
// N_v of row u of ps against the distribution q (K_B entries, each > 0),
// scaled to the effective count neff ≤ n: neff·Σ_v (N_v/n − q_v)²/q_v. It
// returns 0 when the row is empty. O(K_B).
func rowFit(ps graphidx.PairStats, u int, q []float64, neff float64) float64 {
	n := float64(ps.RowSum(u))
	if n == 0 {
		return 0
	}
	x2 := 0.0
	for v, qv := range q {
		d := float64(ps.Count(u, v))/n - qv
		x2 += d * d / max(qv, 1e-12)
	}
	return neff * x2
}

// significant reports whether the statistic x2 with K − 1 degrees of
// freedom exceeds its χ² quantile at ColliderLevel (false for K < 2). O(1).
func significant(x2 float64, k int) bool {
	return k >= 2 && k <= graphidx.MaxValues && x2 > chi2Crit[k-1]
}

// inflNeighbour is what the influence bound keeps of one neighbour w of
// the observed entity s: the table (s, w), row u's count, π_w = P̂(w | s =
// u) (posterior mean), m_w (smoothed marginal), d = π_w − m_w and Pearson's
// X² of the row against m_w.
type inflNeighbour struct {
	id        graphidx.EntityID
	k         int
	ps        graphidx.PairStats
	n         float64
	pi, mw, d [graphidx.MaxValues]float64
	x2        float64
	// partner is the index of the co-parent p when w tested as a common
	// effect of s and p (−1 otherwise); wp is the table (w, p).
	partner int
	wp      graphidx.PairStats
}

// colliderAt reports whether the neighbour w = nb[i] of s is a common
// effect of s and the neighbour p = nb[j] for the observed value u (see
// Bayes, "Influence bound", common-effect test): row u of (s, p) fits p's
// marginal (Pearson X² not significant at ColliderLevel: s = u does not
// move p), s = u moves w (the caller checks that X² of its row against m_w
// is significant), and the two-step prediction q = π_wᵀ Θ_(w→p) of the
// chain s → w → p is rejected by the same row of (s, p) (Pearson X²
// against q on the effective count 1/(1/n_p + 1/n_w) of the two rows,
// significant): w does not carry the change of s on to p, so p depends on
// w through another parent of w. It records the table (w, p) in nb[i].wp.
// One pair look-up, O(K_w·K_p), no allocation.
func (b *Bayes) colliderAt(st Stats, nb []inflNeighbour, i, j, u int) (bool, error) {
	w, p := &nb[i], &nb[j]
	if significant(p.x2, p.k) {
		return false, nil
	}
	x2, _, wp, ok, err := b.twoStepFit(st, nb, i, j, u)
	if err != nil || !ok || !significant(x2, p.k) {
		return false, err
	}
	w.wp = wp
	return true, nil
}

// behind reports whether the route from s through the common effect w =
// nb[i] to z is blocked: z = p, the co-parent nb[i].partner, or p
// separates w from z as far as the change of s shows, i.e. the deviation
// d_z = (π_w − m_w)ᵀ Θ_(w→z) that s = u would pass through w is not
// significantly different from its part through p, (π_w − m_w)ᵀ Θ_(w→p)
// Θ_(p→z): with Δ their difference and V its delta-method variance (rows
// of the three tables independent a posteriori, as in the separation
// check), ‖Δ‖² ≤ V·χ²_(K_z−1)(1 − ColliderLevel)/(K_z − 1) (the quantile
// per degree of freedom; exact for K_z = 2). Then z lies on p's side of w,
// every route from s to z through w passes w between two of its parents,
// and the influence of s reaches z, if at all, through p itself (whose own
// term the bound keeps). False without a partner or without the tables
// (w, z) and (p, z). Two pair look-ups, O(K_w·K_p·K_z), no allocation.
func (b *Bayes) behind(st Stats, nb []inflNeighbour, i int, z graphidx.EntityID) (bool, error) {
	w := &nb[i]
	if w.partner < 0 {
		return false, nil
	}
	p := &nb[w.partner]
	if z == p.id {
		return true, nil
	}
	kz := st.NumValues(z)
	if kz < 2 || kz > graphidx.MaxValues {
		return false, nil
	}
	wz, ok, err := pair(st, w.id, z, w.k, kz)
	if err != nil || !ok {
		return false, err
	}
	pz, ok, err := pair(st, p.id, z, p.k, kz)
	if err != nil || !ok {
		return false, err
	}
	a := b.alpha
	// Row totals n_r + Kα of the three tables.
	var dwz, dwp, dpz [graphidx.MaxValues]float64
	for r := 0; r < w.k; r++ {
		dwz[r] = float64(wz.RowSum(r)) + float64(kz)*a
		dwp[r] = float64(w.wp.RowSum(r)) + float64(p.k)*a
	}
	for j := 0; j < p.k; j++ {
		dpz[j] = float64(pz.RowSum(j)) + float64(kz)*a
	}
	mean := func(ps graphidx.PairStats, d []float64, r, v int) float64 {
		return (float64(ps.Count(r, v)) + a) / d[r]
	}
	// y = devᵀ Θ_(w→p); Δ = devᵀ Θ_(w→z) − y Θ_(p→z).
	dev := w.dev()
	var y, delta [graphidx.MaxValues]float64
	for r := 0; r < w.k; r++ {
		for j := 0; j < p.k; j++ {
			y[j] += dev[r] * mean(w.wp, dwp[:], r, j)
		}
		for v := 0; v < kz; v++ {
			delta[v] += dev[r] * mean(wz, dwz[:], r, v)
		}
	}
	for j := 0; j < p.k; j++ {
		for v := 0; v < kz; v++ {
			delta[v] -= y[j] * mean(pz, dpz[:], j, v)
		}
	}
	d2 := 0.0
	for v := 0; v < kz; v++ {
		d2 += delta[v] * delta[v]
	}
	// V: the Dirichlet quadratic forms of the rows of Θ_(w→z) (route I),
	// of Θ_(w→p) (route Θ_(p→z)) and of Θ_(p→z) (route I).
	vr := 0.0
	for r := 0; r < w.k; r++ {
		if dev[r] == 0 {
			continue
		}
		sq := 0.0
		for v := 0; v < kz; v++ {
			th := mean(wz, dwz[:], r, v)
			sq += th * th
		}
		q := 0.0
		for v := 0; v < kz; v++ {
			m1, m2 := 0.0, 0.0
			for j := 0; j < p.k; j++ {
				th, x := mean(w.wp, dwp[:], r, j), mean(pz, dpz[:], j, v)
				m1 += th * x
				m2 += th * x * x
			}
			q += m2 - m1*m1
		}
		vr += dev[r] * dev[r] * (max(0, 1-sq)/(dwz[r]+1) + max(0, q)/(dwp[r]+1))
	}
	for j := 0; j < p.k; j++ {
		sq := 0.0
		for v := 0; v < kz; v++ {
			th := mean(pz, dpz[:], j, v)
			sq += th * th
		}
		vr += y[j] * y[j] * max(0, 1-sq) / (dpz[j] + 1)
	}
	return d2 <= vr*chi2Crit[kz-1]/float64(kz-1), nil
}

// dev returns π_w − m_w over w's values (filled by the influence bound's
// first pass). O(1).
func (e *inflNeighbour) dev() []float64 { return e.d[:e.k] }

// explains tests whether the neighbour w1 = nb[i] of s carries the change
// that s = u makes to the neighbour w2 = nb[j] (see Bayes, "Influence
// bound", mediated neighbours): row u of (s, w2) does not reject the
// two-step prediction q = π_w1ᵀ Θ_(w1→w2) (Pearson X² against q on the
// effective count n_e = 1/(1/n_w1 + 1/n_w2), not significant at
// ColliderLevel), while it does reject w2's marginal (the caller checks
// that, so the test has something to explain). Then w1 separates s from
// w2 as far as the rows show, and every route from s through w2 runs
// through w1 first, except a part of w2's change the test could not see:
// dmin, the smallest total-variation residual it detects (at the 50 %
// point: X² at the χ² quantile), placed on the two most likely values
// of q, dmin² = χ²_(K−1)(1 − ColliderLevel)/(n_e·(1/q_(1) + 1/q_(2))). ok
// is false when the prediction is rejected or a row is empty. One pair
// look-up, O(K_w1·K_w2), no allocation.
func (b *Bayes) explains(st Stats, nb []inflNeighbour, i, j, u int) (dmin float64, ok bool, err error) {
	x2, dmin, _, ok, err := b.twoStepFit(st, nb, i, j, u)
	if err != nil || !ok {
		return 0, false, err
	}
	return dmin, !significant(x2, nb[j].k), nil
}

// twoStepFit returns Pearson's X² of row u of (s, a2), a2 = nb[j], against
// the two-step prediction q = π_a1ᵀ Θ_(a1→a2) through a1 = nb[i] (predict),
// on the effective count n_e = 1/(1/n_a1 + 1/n_a2) of the two rows, the
// smallest total-variation residual dmin that the test detects (see
// explains), and the table (a1, a2); ok is false when a row is empty or
// the pair was never observed. One pair look-up, O(K_a1·K_a2), no
// allocation.
func (b *Bayes) twoStepFit(st Stats, nb []inflNeighbour, i, j, u int) (x2, dmin float64, ps graphidx.PairStats, ok bool, err error) {
	a1, a2 := &nb[i], &nb[j]
	if a1.n == 0 || a2.n == 0 {
		return 0, 0, ps, false, nil
	}
	ps, ok, err = pair(st, a1.id, a2.id, a1.k, a2.k)
	if err != nil || !ok {
		return 0, 0, ps, false, err
	}
	var q [graphidx.MaxValues]float64
	b.predict(q[:a2.k], a1.pi[:a1.k], ps)
	neff := 1 / (1/a1.n + 1/a2.n)
	q1, q2 := 0.0, 0.0 // the two largest q_v
	for _, v := range q[:a2.k] {
		if v > q1 {
			q1, q2 = v, q1
		} else if v > q2 {
			q2 = v
		}
	}
	if a2.k >= 2 && q2 > 0 {
		dmin = math.Sqrt(chi2Crit[a2.k-1] / (neff * (1/q1 + 1/q2)))
	}
	return rowFit(a2.ps, u, q[:a2.k], neff), dmin, ps, true, nil
}

// predict sets q = πᵀ Θ, Θ the posterior means of the table ps (K_A = len(π)
// rows, K_B = len(q) columns): the distribution the two-step chain through
// ps's first entity predicts for its second. O(K_A·K_B).
func (b *Bayes) predict(q, pi []float64, ps graphidx.PairStats) {
	clear(q)
	kb := float64(len(q)) * b.alpha
	for r, pr := range pi {
		f := pr / (float64(ps.RowSum(r)) + kb)
		for v := range q {
			q[v] += f * (float64(ps.Count(r, v)) + b.alpha)
		}
	}
}

// dependent reports whether the pair table ps rejects independence:
// Pearson's X² = Σ_ij (N_ij − N_i·N_·j/N)²/(N_i·N_·j/N) against χ² with
// (K_A − 1)(K_B − 1) degrees of freedom at ColliderLevel (chi2Crit, or the
// Wilson–Hilferty approximation beyond its range). Empty rows and columns
// carry no degree of freedom. O(K_A·K_B).
func dependent(ps graphidx.PairStats) bool {
	var rows, cols [graphidx.MaxValues]float64
	tot := 0.0
	for i := 0; i < ps.KA; i++ {
		for j := 0; j < ps.KB; j++ {
			c := float64(ps.Count(i, j))
			rows[i] += c
			cols[j] += c
			tot += c
		}
	}
	if !(tot > 0) {
		return false
	}
	x2, ka, kb := 0.0, 0, 0
	for i := 0; i < ps.KA; i++ {
		if rows[i] == 0 {
			continue
		}
		ka++
		for j := 0; j < ps.KB; j++ {
			if cols[j] == 0 {
				continue
			}
			e := rows[i] * cols[j] / tot
			d := float64(ps.Count(i, j)) - e
			x2 += d * d / e
		}
	}
	for j := 0; j < ps.KB; j++ {
		if cols[j] > 0 {
			kb++
		}
	}
	df := (ka - 1) * (kb - 1)
	if df < 1 {
		return false
	}
	if df < graphidx.MaxValues {
		return x2 > chi2Crit[df]
	}
	// Wilson–Hilferty: χ²_q ≈ d·(1 − 2/(9d) + z_q·√(2/(9d)))³, z at 0.99.
	const z99 = 2.3263478740408408
	f := 2 / (9 * float64(df))
	c := 1 - f + z99*math.Sqrt(f)
	return x2 > float64(df)*c*c*c
}
