package scorer

import (
	"fmt"
	"math"

	"github.com/hopwise/hopwise/graphidx"
)

// Parallel bridges: an answer through two bridges read side by side
// (docs/QUALITY.md, section 4e).
//
// For an observed value s = u and a target t with two bridges b1 and b2,
// each a neighbour of both s and t, the estimate is the best linear
// predictor of t's indicator vector on the indicators of b1 and b2, taken
// in expectation given s = u:
//
//	p̂ = m_t + B1ᵀ (π1 − m1) + B2ᵀ (π2 − m2),   [B1; B2] = Σ_XX⁻¹ Σ_XY,
//
// with π_i = P̂(b_i | s = u) (row u of the table (s, b_i)), X the first
// K_i − 1 indicators of b1 and b2, Σ_XY the covariances of X with t's
// indicators from the tables (b1, t) and (b2, t), and Σ_XX the covariance
// of X: its diagonal blocks from the bridges' marginals, its off-diagonal
// block from the table (b1, b2) when it was observed, else through s
// (b1 ⊥ b2 | s) and through t (b1 ⊥ b2 | t), averaged. It is exact when
// {b1, b2} separates s from t and E[1_t | b1, b2] is additive in b1 and b2
// (no interaction). Only the conditionals of each bridge given s are
// needed, not their joint.

// ParallelBridger is an optional interface of a Model: an estimate of t
// given s = u through the two bridges b1 and b2 read side by side, with its
// expected error. ok is false when a table it needs was never observed or
// the bridges' covariance cannot be inverted (the bridges carry the same
// information, or they have too many values, parallelMaxCols); then the
// Estimate is zero.
type ParallelBridger interface {
	Parallel(ws *Workspace, st Stats, s graphidx.EntityID, u int, b1, b2, t graphidx.EntityID) (est Estimate, ok bool, err error)
}

var _ ParallelBridger = (*Bayes)(nil)

// ptab is one pair table as the parallel estimate reads it: posterior-mean
// rows th (ka×kb), row shares w (the table's smoothed row marginal) and
// row factors ci = 1/(n_r + K_b α + 1), the Dirichlet row's covariance
// scale.
type ptab struct {
	ka, kb int
	th     []float64
	w      []float64
	ci     []float64
	// cw is the row shares' covariance scale 1/(N + K_a α + 1), N the
	// table's total.
	cw float64
}

// load fills tb from ps with symmetric Dirichlet(α) rows.
func (tb *ptab) load(ps graphidx.PairStats, alpha float64) {
	tb.ka, tb.kb = ps.KA, ps.KB
	tb.th = growF(tb.th, tb.ka*tb.kb)
	tb.w = growF(tb.w, tb.ka)
	tb.ci = growF(tb.ci, tb.ka)
	tot := 0.0
	for r := 0; r < tb.ka; r++ {
		n := float64(ps.RowSum(r))
		den := n + float64(tb.kb)*alpha
		for v := 0; v < tb.kb; v++ {
			tb.th[r*tb.kb+v] = (float64(ps.Count(r, v)) + alpha) / den
		}
		tb.w[r] = n + alpha
		tot += n + alpha
		tb.ci[r] = 1 / (den + 1)
	}
	for r := range tb.w[:tb.ka] {
		tb.w[r] /= tot
	}
	tb.cw = 1 / (tot + 1)
}

// parWork is the parallel estimate's scratch (Workspace.par).
type parWork struct {
	a1, a2, t1, t2, d ptab // (s, b1), (s, b2), (b1, t), (b2, t), (b1, b2)
	hasD              bool
	sxx, sxy, sol     []float64
	m1, m2, mt        []float64
	p12               []float64
	base, tmp, hubT   []float64
	piv               []int
}

// parallelHub selects which assumption gives the bridges' covariance when
// their own table is missing (test and diagnostic use; 0 = the average of
// both, 1 = through s only, 2 = through t only).
var parallelHub = 0

// Parallel implements ParallelBridger (see the comment at the top of this
// file). Err = Σ_v Var(p̂_v) + I + H + E + 2β: the delta-method variance
// over every row of the tables read; I the expected squared interaction
// bias under an uninformative prior on E[1_t | b1, b2] (interactionBias);
// H = ‖p̂_s − p̂_t‖²/4 when the bridges' covariance had to be taken through
// an endpoint, the squared half-difference of the two assumptions (the
// average is within it of either); E the bound excess of the influence
// bound (boundExcess). The estimate is projected onto the simplex. Cost
// O((K_s + K_1 + K_2)·K·(K_1 + K_2)³) for the variance; 4 or 5 pair
// look-ups.
func (b *Bayes) Parallel(ws *Workspace, st Stats, s graphidx.EntityID, u int, b1, b2, t graphidx.EntityID) (Estimate, bool, error) {
	if st == nil {
		return Estimate{}, false, fmt.Errorf("%w: nil Stats", ErrBadStats)
	}
	if ws == nil {
		ws = new(Workspace)
	}
	if b1 == b2 || b1 == s || b1 == t || b2 == s || b2 == t || s == t {
		return Estimate{}, false, fmt.Errorf("%w: parallel bridges %d and %d between %d and %d must be four distinct entities", ErrBadStats, b1, b2, s, t)
	}
	ks := st.NumValues(s)
	if u < 0 || u >= ks {
		return Estimate{}, false, fmt.Errorf("%w: value %d of entity %d, which has %d values", ErrValueRange, u, s, ks)
	}
	kt := st.NumValues(t)
	if kt < 1 || kt > graphidx.MaxValues {
		return Estimate{}, false, fmt.Errorf("%w: entity %d has %d values", ErrBadStats, t, kt)
	}
	if ws.par == nil {
		ws.par = new(parWork)
	}
	pw := ws.par
	for _, q := range [...]struct {
		tb   *ptab
		a, c graphidx.EntityID
	}{{&pw.a1, s, b1}, {&pw.a2, s, b2}, {&pw.t1, b1, t}, {&pw.t2, b2, t}} {
		ps, ok := st.Pair(q.a, q.c)
		if !ok {
			return Estimate{}, false, nil
		}
		if ps.KA != st.NumValues(q.a) || ps.KB != st.NumValues(q.c) || ps.KA < 1 || ps.KB < 1 {
			return Estimate{}, false, fmt.Errorf("%w: pair (%d, %d) has a %d×%d table", ErrBadStats, q.a, q.c, ps.KA, ps.KB)
		}
		q.tb.load(ps, b.hopAlpha)
	}
	if pw.a1.kb < 2 || pw.a2.kb < 2 || kt < 2 {
		return Estimate{}, false, nil
	}
	if pw.a1.kb+pw.a2.kb-2 > parallelMaxCols || kt > parallelMaxCols || ks > parallelMaxCols {
		// Not offered for entities of many values: the variance re-solves
		// the normal equations once per row entry read.
		return Estimate{}, false, nil
	}
	if ps, ok := st.Pair(b1, b2); ok && ps.KA == pw.a1.kb && ps.KB == pw.a2.kb {
		pw.d.load(ps, b.hopAlpha)
		pw.hasD = true
	} else {
		pw.hasD = false
	}
	pw.base = growF(pw.base, kt)
	pw.tmp = growF(pw.tmp, kt)
	pw.hubT = growF(pw.hubT, kt)
	hub := 0.0
	if pw.hasD {
		if !pw.eval(u, 0, pw.base) {
			return Estimate{}, false, nil
		}
	} else {
		switch parallelHub {
		case 1, 2:
			if !pw.eval(u, parallelHub, pw.base) {
				return Estimate{}, false, nil
			}
		default:
			if !pw.eval(u, 1, pw.base) || !pw.eval(u, 2, pw.hubT) {
				return Estimate{}, false, nil
			}
			for v := range kt {
				d := pw.base[v] - pw.hubT[v]
				hub += d * d / 4
				pw.base[v] = (pw.base[v] + pw.hubT[v]) / 2
			}
		}
	}
	vr, ok := pw.variance(u, kt)
	if !ok {
		return Estimate{}, false, nil
	}
	inter, ok := pw.interactionBias(u, kt)
	if !ok {
		return Estimate{}, false, nil
	}
	dist := ws.newDist(kt)
	copy(dist, pw.base[:kt])
	projectSimplex(dist)
	// The bound excess reads the influence bound of this query.
	if len(ws.ks) == 0 {
		ws.ks = append(ws.ks, ks)
	} else {
		ws.ks[0] = ks
	}
	ex, err := b.boundExcess(ws, st, s, u, t, kt, dist)
	if err != nil {
		return Estimate{}, false, err
	}
	sup := uint64(math.MaxUint64)
	for _, q := range [...][2]graphidx.EntityID{{s, b1}, {s, b2}, {b1, t}, {b2, t}} {
		ps, _ := st.Pair(q[0], q[1])
		sup = min(sup, ps.Support())
	}
	return Estimate{Dist: dist, Err: vr + inter + hub + ex + 2*b.beta, Var: vr, Support: sup}, true, nil
}

// eval computes the unprojected estimate for s = u into out. hub: 0 the
// table (b1, b2), 1 through s, 2 through t. false when Σ_XX is singular.
func (pw *parWork) eval(u, hub int, out []float64) bool {
	a1, a2, t1, t2 := &pw.a1, &pw.a2, &pw.t1, &pw.t2
	k1, k2, kt := a1.kb, a2.kb, t1.kb
	n1, n2 := k1-1, k2-1
	n := n1 + n2
	pw.m1 = growF(pw.m1, k1)
	pw.m2 = growF(pw.m2, k2)
	pw.mt = growF(pw.mt, kt)
	m1, m2, mt := pw.m1[:k1], pw.m2[:k2], pw.mt[:kt]
	// Marginals of b1, b2 (as the tables with t hold them) and of t (the
	// mean of its two tables).
	clear(mt)
	for a := range k1 {
		m1[a] = t1.w[a]
		for v := range kt {
			mt[v] += t1.w[a] * t1.th[a*kt+v] / 2
		}
	}
	for c := range k2 {
		m2[c] = t2.w[c]
		for v := range kt {
			mt[v] += t2.w[c] * t2.th[c*kt+v] / 2
		}
	}
	pw.sxx = growF(pw.sxx, n*n)
	pw.sxy = growF(pw.sxy, n*kt)
	sxx, sxy := pw.sxx[:n*n], pw.sxy[:n*kt]
	for i := range n1 {
		for j := range n1 {
			x := -m1[i] * m1[j]
			if i == j {
				x += m1[i]
			}
			sxx[i*n+j] = x
		}
	}
	for i := range n2 {
		for j := range n2 {
			x := -m2[i] * m2[j]
			if i == j {
				x += m2[i]
			}
			sxx[(n1+i)*n+n1+j] = x
		}
	}
	// Off-diagonal block Cov(1_b1, 1_b2).
	pw.p12 = growF(pw.p12, k1*k2)
	p12 := pw.p12[:k1*k2]
	clear(p12)
	var r1, r2 []float64 // the joint's own marginals
	switch hub {
	case 0:
		d := &pw.d
		for a := range k1 {
			for c := range k2 {
				p12[a*k2+c] = d.w[a] * d.th[a*k2+c]
			}
		}
	case 1:
		for r := range a1.ka {
			w := a1.w[r]
			for a := range k1 {
				x := w * a1.th[r*k1+a]
				for c := range k2 {
					p12[a*k2+c] += x * a2.th[r*k2+c]
				}
			}
		}
	case 2:
		// P(b1 = a, b2 = c) = Σ_v P(t = v) P(a | v) P(c | v), with
		// P(a | v) = P(a, v)/P(v) from (b1, t) and P(c | v) from (b2, t).
		var c1, c2 [graphidx.MaxValues]float64
		for v := range kt {
			c1[v], c2[v] = t1.colMarginal(v), t2.colMarginal(v)
		}
		for v := range kt {
			if c1[v] <= 0 || c2[v] <= 0 {
				return false
			}
			f := mt[v] / (c1[v] * c2[v])
			for a := range k1 {
				x := f * t1.w[a] * t1.th[a*kt+v]
				for c := range k2 {
					p12[a*k2+c] += x * t2.w[c] * t2.th[c*kt+v]
				}
			}
		}
	}
	var rb1, rb2 [graphidx.MaxValues]float64
	for a := range k1 {
		for c := range k2 {
			rb1[a] += p12[a*k2+c]
			rb2[c] += p12[a*k2+c]
		}
	}
	r1, r2 = rb1[:k1], rb2[:k2]
	for i := range n1 {
		for j := range n2 {
			x := p12[i*k2+j] - r1[i]*r2[j]
			sxx[i*n+n1+j] = x
			sxx[(n1+j)*n+i] = x
		}
	}
	// Σ_XY from (b1, t) and (b2, t), each with its own marginals.
	t1.covRows(sxy, n1, 0)
	t2.covRows(sxy, n2, n1)
	pw.sol = growF(pw.sol, n*kt)
	pw.piv = growI(pw.piv, n)
	if !solveSPD(sxx, n, sxy, kt, pw.sol[:n*kt]) {
		return false
	}
	// Deviations of the bridges at s = u, each from its marginal in the
	// table (s, b_i), so that the tables' levels need not agree.
	copy(out[:kt], mt)
	a1.addDeviations(out[:kt], pw.sol, u, n1, 0)
	a2.addDeviations(out[:kt], pw.sol, u, n2, n1)
	return true
}

// colMarginal is Σ_r w_r θ_rv, column v's marginal in tb.
func (tb *ptab) colMarginal(v int) float64 {
	m := 0.0
	for r := range tb.ka {
		m += tb.w[r] * tb.th[r*tb.kb+v]
	}
	return m
}

// covRows writes, for the table tb of (b, t) and i < n, the covariances
// Cov(1_(b = i), 1_(t = v)) = w_i θ_iv − w_i P(t = v) into rows off + i of
// dst (tb.kb columns), P(t = v) the column's marginal in tb.
func (tb *ptab) covRows(dst []float64, n, off int) {
	kt := tb.kb
	for v := range kt {
		jt := tb.colMarginal(v)
		for i := range n {
			dst[(off+i)*kt+v] = tb.w[i]*tb.th[i*kt+v] - tb.w[i]*jt
		}
	}
}

// addDeviations adds to out (len K_t), for the table tb of (s, b) and
// i < n, the coefficient rows off + i of sol times b's deviation at s = u
// from its marginal in tb, θ_ui − Σ_r w_r θ_ri.
func (tb *ptab) addDeviations(out, sol []float64, u, n, off int) {
	kt := len(out)
	for i := range n {
		d := tb.th[u*tb.kb+i] - tb.colMarginal(i)
		for v := range kt {
			out[v] += sol[(off+i)*kt+v] * d
		}
	}
}

// solveSPD solves A X = B for the symmetric positive-definite n×n matrix a
// (row-major; overwritten by its Cholesky factor) and the n×k right-hand
// side b, into x. false when a is not numerically positive definite.
func solveSPD(a []float64, n int, b []float64, k int, x []float64) bool {
	scale := 0.0
	for i := range n {
		scale = max(scale, a[i*n+i])
	}
	if !(scale > 0) {
		return false
	}
	for j := range n {
		d := a[j*n+j]
		for l := range j {
			d -= a[j*n+l] * a[j*n+l]
		}
		if !(d > 1e-9*scale) {
			return false
		}
		d = math.Sqrt(d)
		a[j*n+j] = d
		for i := j + 1; i < n; i++ {
			x := a[i*n+j]
			for l := range j {
				x -= a[i*n+l] * a[j*n+l]
			}
			a[i*n+j] = x / d
		}
	}
	copy(x[:n*k], b[:n*k])
	for c := range k {
		for i := range n {
			y := x[i*k+c]
			for l := range i {
				y -= a[i*n+l] * x[l*k+c]
			}
			x[i*k+c] = y / a[i*n+i]
		}
		for i := n - 1; i >= 0; i-- {
			y := x[i*k+c]
			for l := i + 1; l < n; l++ {
				y -= a[l*n+i] * x[l*k+c]
			}
			x[i*k+c] = y / a[i*n+i]
		}
	}
	return true
}

// estimate evaluates the (hub-averaged, when the bridges' table is
// missing) unprojected estimate into out.
func (pw *parWork) estimate(u int, out []float64) bool {
	kt := pw.t1.kb
	if pw.hasD {
		return pw.eval(u, 0, out)
	}
	switch parallelHub {
	case 1, 2:
		return pw.eval(u, parallelHub, out)
	}
	if !pw.eval(u, 1, out) || !pw.eval(u, 2, pw.hubT) {
		return false
	}
	for v := range kt {
		out[v] = (out[v] + pw.hubT[v]) / 2
	}
	return true
}

// parallelMaxCols bounds the indicator columns of the two bridges
// together (K_1 + K_2 − 2) and the values of s and t for which the
// parallel answer is offered: its variance re-solves the normal equations
// once per row entry read, O((K_s + K_1 + K_2)·K·n³) with n = K_1 + K_2 − 2
// (BenchmarkParallel: 8.3 µs for binary entities, 38 µs for three values
// each; 13 ms at K = 16, 9, 9, 16 before the row shares were added). Analytic gradients would lift it.
const parallelMaxCols = 4

// parStep is the finite-difference step of the delta-method gradient (the
// estimate is a smooth rational function of the rows).
const parStep = 1e-6

// variance is the delta-method variance Σ_v Var(p̂_v) over every row of
// the tables the estimate reads, rows independent a posteriori, each a
// Dirichlet row of covariance (diag θ − θθᵀ)·c_r (as the chain variance,
// docs/DESIGN.md, Error model): Σ_rows Σ_v g_vᵀ (diag θ − θθᵀ) g_v c_r with g_v the
// gradient of p̂_v in the row, by forward differences; plus the same form
// for each table's row shares, a Dirichlet vector of scale 1/(N + 1).
// pw.base must hold the estimate.
func (pw *parWork) variance(u, kt int) (float64, bool) {
	tabs := [5]*ptab{&pw.a1, &pw.a2, &pw.t1, &pw.t2, &pw.d}
	nt := 4
	if pw.hasD {
		nt = 5
	}
	var g [graphidx.MaxValues * graphidx.MaxValues]float64
	total := 0.0
	for ti := range nt {
		tb := tabs[ti]
		for r := range tb.ka {
			row := tb.th[r*tb.kb : r*tb.kb+tb.kb]
			for j := range tb.kb {
				old := row[j]
				row[j] = old + parStep
				ok := pw.estimate(u, pw.tmp)
				row[j] = old
				if !ok {
					return 0, false
				}
				for v := range kt {
					g[j*kt+v] = (pw.tmp[v] - pw.base[v]) / parStep
				}
			}
			// Σ_v [Σ_j θ_j g_jv² − (Σ_j θ_j g_jv)²]·c_r
			total += parQuad(row, g[:], kt) * tb.ci[r]
		}
		// The row shares, a Dirichlet vector of the table's total: the
		// marginals and covariances the estimate reads depend on them.
		for j := range tb.ka {
			old := tb.w[j]
			tb.w[j] = old + parStep
			ok := pw.estimate(u, pw.tmp)
			tb.w[j] = old
			if !ok {
				return 0, false
			}
			for v := range kt {
				g[j*kt+v] = (pw.tmp[v] - pw.base[v]) / parStep
			}
		}
		total += parQuad(tb.w[:tb.ka], g[:], kt) * tb.cw
	}
	return total, true
}

// interactionBias is the expected squared bias of the additive model at
// s = u when E[1_t | b1, b2] = f(b1, b2) is not additive. With π the
// bridges' joint (their table, or through s) and ρ_u(a, c) = π1_a·π2_c
// their joint given s = u (b1 ⊥ b2 | s), the estimate's error is
// Σ_ac π(a, c)·h(a, c)·f(a, c), h the part of the likelihood ratio ρ_u/π
// that no additive function of (b1, b2) explains (its residual after the
// π-weighted projection onto 1, 1_b1, 1_b2, which the normal equations
// give). The pair tables say nothing of f beyond its additive part, so f's
// cells are taken as independent draws of an uninformative Dirichlet(1)
// prior over t's K_t values: E‖bias‖² = (K_t − 1)/(K_t(K_t + 1))·Σ_ac
// (π h)². It is 0 when s moves only one bridge, and when s = u leaves the
// bridges' joint as π leaves it. O(K_1·K_2·(K_1 + K_2)²).
func (pw *parWork) interactionBias(u, kt int) (float64, bool) {
	a1, a2 := &pw.a1, &pw.a2
	k1, k2 := a1.kb, a2.kb
	n1, n2 := k1-1, k2-1
	n := n1 + n2
	// π: the bridges' table, else through s.
	var pi [graphidx.MaxValues * graphidx.MaxValues]float64
	if pw.hasD {
		for a := range k1 {
			for c := range k2 {
				pi[a*k2+c] = pw.d.w[a] * pw.d.th[a*k2+c]
			}
		}
	} else {
		for r := range a1.ka {
			for a := range k1 {
				x := a1.w[r] * a1.th[r*k1+a]
				for c := range k2 {
					pi[a*k2+c] += x * a2.th[r*k2+c]
				}
			}
		}
	}
	var m1, m2 [graphidx.MaxValues]float64
	for a := range k1 {
		for c := range k2 {
			m1[a] += pi[a*k2+c]
			m2[c] += pi[a*k2+c]
		}
	}
	// Σ of π, and dev = E_ρ[X] − E_π[X].
	pw.sxx = growF(pw.sxx, n*n)
	sxx := pw.sxx[:n*n]
	for i := range n {
		for j := range n {
			var x float64
			switch {
			case i < n1 && j < n1:
				x = -m1[i] * m1[j]
				if i == j {
					x += m1[i]
				}
			case i >= n1 && j >= n1:
				x = -m2[i-n1] * m2[j-n1]
				if i == j {
					x += m2[i-n1]
				}
			case i < n1:
				x = pi[i*k2+j-n1] - m1[i]*m2[j-n1]
			default:
				x = pi[j*k2+i-n1] - m1[j]*m2[i-n1]
			}
			sxx[i*n+j] = x
		}
	}
	var dev, coef [2 * graphidx.MaxValues]float64
	for i := range n1 {
		dev[i] = a1.th[u*k1+i] - m1[i]
	}
	for i := range n2 {
		dev[n1+i] = a2.th[u*k2+i] - m2[i]
	}
	if !solveSPD(sxx, n, dev[:n], 1, coef[:n]) {
		return 0, false
	}
	// h(a, c) = ρ/π − 1 − coefᵀ(φ(a, c) − m), summed as Σ (π h)².
	s := 0.0
	for a := range k1 {
		for c := range k2 {
			p := pi[a*k2+c]
			if p <= 0 {
				continue
			}
			lin := 0.0
			for i := range n1 {
				x := -m1[i]
				if a == i {
					x++
				}
				lin += coef[i] * x
			}
			for i := range n2 {
				x := -m2[i]
				if c == i {
					x++
				}
				lin += coef[n1+i] * x
			}
			rho := a1.th[u*k1+a] * a2.th[u*k2+c]
			ph := rho - p*(1+lin)
			s += ph * ph
		}
	}
	return float64(kt-1) / float64(kt*(kt+1)) * s, true
}

// projectSimplex replaces p by its Euclidean projection onto the
// probability simplex (sort-free O(K²) form: the threshold τ with
// Σ_v max(p_v − τ, 0) = 1; Held, Wolfe & Crowder 1974).
func projectSimplex(p []float64) {
	ok := true
	sum := 0.0
	for _, x := range p {
		if x < 0 || x > 1 {
			ok = false
		}
		sum += x
	}
	if ok && math.Abs(sum-1) < 1e-12 {
		return
	}
	// τ is the largest of the candidates (Σ_{p_w ≥ p_v} p_w − 1)/#{p_w ≥ p_v}
	// that keeps p_v above it.
	tau := math.Inf(-1)
	for _, x := range p {
		s, c := 0.0, 0
		for _, y := range p {
			if y >= x {
				s += y
				c++
			}
		}
		if t := (s - 1) / float64(c); x > t && t > tau {
			tau = t
		}
	}
	for i, x := range p {
		p[i] = max(0, x-tau)
	}
}

// parQuad returns Σ_v [Σ_j θ_j g_jv² − (Σ_j θ_j g_jv)²] for the
// distribution θ and the gradient g (row j, column v, K_t columns): the
// delta-method variance of a Dirichlet vector's image, before its scale.
func parQuad(theta, g []float64, kt int) float64 {
	total := 0.0
	for v := range kt {
		s1, s2 := 0.0, 0.0
		for j, th := range theta {
			s1 += th * g[j*kt+v] * g[j*kt+v]
			s2 += th * g[j*kt+v]
		}
		if q := s1 - s2*s2; q > 0 {
			total += q
		}
	}
	return total
}
