package scorer

import (
	"fmt"

	"github.com/hopwise/hopwise/graphidx"
)

// Bayes is the valued model: each local conditional P(b | a = r) gets a
// symmetric Dirichlet(α) prior, updated by the pair counts, and answers carry
// their posterior variance.
//
// # Local conditional
//
// For the ordered pair (a, b) with counts N[r][v], n_r = Σ_v N[r][v] and K_b
// values of b, the posterior of row r is Dirichlet(N[r][·] + α), with mean
// and covariance (Gelman et al., BDA 3rd ed. §3.4; Beta case §2.4)
//
//	θ̂_v       = (N[r][v] + α) / (n_r + K_b α)
//	Cov(θ)    = (diag(θ̂) − θ̂θ̂ᵀ) / (n_r + K_b α + 1).
//
// # Direct estimate (empirical Bayes)
//
// When the statistics carry marginals (Marginals; *graphidx.Index does), the
// prior of row u of the pair (s, t) is Dirichlet(a) with pseudo-counts
//
//	a_v = w·A·m̂_v + (1 − w)·α,   w = A/(A + S),
//
// where m̂_v = (c_v + α)/(Σ_w c_w + K_t α) is the target's smoothed marginal
// (c its marginal counts), S the pair's support and A the prior strength
// (WithPriorStrength, fitted: DefaultPriorStrength). With a₀ = Σ_v a_v the
// posterior is Dirichlet(N[u][·] + a):
//
//	θ̂_v = (N[u][v] + a_v) / (n_u + a₀),   Err = (1 − Σ_v θ̂_v²)/(n_u + a₀ + 1).
//
// The error is the mean squared error of this shrinkage estimator,
// θ̂ = λ·N[u][·]/n_u + (1 − λ)·a/a₀ with λ = n_u/(n_u + a₀):
//
//	Err = λ²·(1 − Σ_v θ̂_v²)/n_u + (1 − λ)²·E0,   E0 = η·(1 − P̂(s = u))²·(1 − 1/K_t),
//
// where E0 is the expected squared distance of an unobserved pair's
// conditional from the marginal and P̂(s = u) = (c_u + α)/(Σ c + K_s α) the
// observed value's share. E0 grows with the rarity of the observed value:
// since Σ_u P(s = u)·(P(t | s = u) − m) = 0, the conditional given a common
// value is tied to the marginal, one given a rare value hardly at all,
// whatever the marginal's spread. η (WithUnseenSpread) is fitted by least
// squares on the held-out queries of the fit worlds, where this feature
// explained the realised distances far better than the marginal's spread
// 1 − Σ m̂² (residual sum of squares 13.4 against 19.9 over 600 queries).
// A is fitted on the same queries, so that the Dirichlet(A·m̂) prior
// variance (1 − Σ m̂²)/(A + 1) matches their distances on average; it sets
// how fast the estimate leaves the marginal. A pair never observed (S = 0)
// answers the target's marginal with Err = E0. As the pair is seen more,
// the marginal's weight w
// fades and the prior becomes the symmetric Dirichlet(α) of a well-seen pair
// (pseudo-count rule): a pair observed together often is typically a close,
// strongly dependent one, whose rare rows lie far from the target's
// marginal (measured: centring every pair on the marginal with A = 2 raised
// the supported pairs' direct MSE on the evaluation worlds from 7.9e-4 to
// 9.9e-4). Without marginals the prior is the symmetric Dirichlet(α), the
// error its posterior variance (1 − Σ θ̂²)/(n_u + K_t α + 1), and an
// unobserved pair gets the uniform distribution with Err (K−1)/(K(Kα+1)). Cost O(K_s·K_t) (the pair support sums the whole table)
// plus one Stats lookup and one marginal.
//
// # Chain estimate
//
// For s = b0 → b1 → … → bm → t = b(m+1), M_k is the K_(k−1)×K_k matrix of
// posterior means of the pair (b(k−1), b(k)), and
//
//	p̂ = e_uᵀ M_1 M_2 … M_(m+1),
//
// which is exact when every bridge screens the earlier part of the chain off
// from the later part (the Markov property). The delta-method products use
// matMul (gonum's Dgemm summation order, bit for bit); ExactMoments uses
// gonum/mat.
//
// # Chain variance (delta method)
//
// With x_(k−1) = e_uᵀ M_1…M_(k−1), R_k = M_(k+1)…M_(m+1) (R_(m+1) = I) and
// rows of all M_k treated as independent a posteriori (the model's
// assumption: different pair tables are counted over overlapping contexts),
// the first-order (delta-method) variance is
//
//	Var(p̂_v) ≈ Σ_k Σ_r x_(k−1)[r]² · R_k[:,v]ᵀ Σ_(k,r) R_k[:,v].
//
// Because Σ_(k,r) = (diag θ − θθᵀ)/c_(k,r) with θ = M_k[r,:], the quadratic
// form is (Σ_j θ_j R_k[j,v]² − (Σ_j θ_j R_k[j,v])²)/c_(k,r), i.e.
// ((M_k (R_k∘R_k))[r,v] − (M_k R_k)[r,v]²)/c_(k,r). A backward pass computes
// M_k·[R_k | R_k∘R_k] = [R_(k−1) | M_k(R_k∘R_k)] with one matrix product per
// edge, so no covariance matrix is formed. Then
//
//	Err_chain = Σ_v Var(p̂_v) + β·m + γ·(δ − L)₊² + max(λ·S, E),   L = Π_k ℓ_k,
//
// S the separation bias and E the bound excess (below),
// where ℓ_k = max(0, ρ̂_k − z/√n_k) is edge k's association lower bound
// (SignalBound; EdgeCost = −log ℓ_k, so L = exp(−Σ_k EdgeCost)). The last
// term is the missing-signal bias: a chain whose signal cannot be told from
// zero answers about the target's marginal, and when the endpoints are in
// fact dependent its error is the whole dependence it missed, which neither
// the variance (a weak chain varies little) nor a constant per hop sees. A
// chain that keeps a detectable signal (L ≥ δ) pays nothing. γ and δ are
// fitted (DefaultMissingGamma, DefaultMissingDelta): on the fit worlds
// almost every chain with a large bias had L ≈ 0 (its best chain missed the
// true path), and chains with L above ≈ 0.1 almost never had one. The term is
// ≥ 0, so Err_chain ≥ β·m still holds (the router's pruning bound).
//
// # Separation check
//
// The chain rule is exact only when every bridge screens the earlier part of
// the chain off from the later part. Where a bridge b_k's two chain
// neighbours prev = b_(k−1) and next = b_(k+1) were themselves observed
// together, the index holds their own table D_k, and the chain's two-step
// route through b_k can be compared with it: with x_(k−1) the forward vector
// at prev (e_u at s) and R_k = M_(k+1)…M_(m+1),
//
//	Δ_k = x_(k−1) (M_k M_(k+1) − D_k) R_(k+1),
//
// the difference at the target between the chain and the chain with b_k cut
// out. If b_k separates prev from next, E[Δ_k] = 0 and E‖Δ_k‖² = V_k, the
// sum of the delta-method variances of the two terms (rows of M_k, M_(k+1)
// and D_k independent a posteriori); otherwise ‖Δ_k‖² − V_k estimates the
// squared bias that b_k adds at the target (the classic case is a common
// effect: prev → b_k ← next, where the chain invents a dependence that D_k
// does not show). S = Σ_k max(0, ‖Δ_k‖² − V_k) over the checked bridges; a
// bridge whose neighbours were never observed together is tested against
// witnesses instead: neighbours w of b_k observed with prev and next, and,
// for a one-bridge chain when s has at most InfluenceFirst neighbours,
// neighbours w of s observed with t that s moves, whose table with next
// must show the dependence the chain claims through s (one-sided; see
// prevWitnessBias). S is capped at ‖p̂ − m̂_t‖², the chain's own squared distance from the
// target's smoothed marginal: the check measures a dependence the chain
// invents, and that bias is at most the chain's distance from the marginal
// (equal when the endpoints are independent, as through a common effect).
// λ = 1 (WithSeparation) charges the estimate as derived. docs/QUALITY.md
// has the derivation. Cost O(m·K³) more and m more pair look-ups.
//
// # Influence bound
//
// For a pair never observed together, with Marginals, RankedNeighborer and
// NeighborLister available and at most InfluenceFirst neighbours of s, E0
// becomes min(E0, κ·2·min(B, B_t)² + Var(m̂_t)) (WithInfluence, κ = 1;
// Var(m̂_t) = (1 − Σ m̂²)/(N_t + K_t α + 1) the posterior variance of the
// target's marginal from its N_t counts: the marginal's own error). With π_w =
// P̂(w | s = u), m_w = P̂(w) and Θ_(w→z) the posterior means of (w, z):
//
//	B   = Σ_w min(TV(π_w, m_w), max_z TV((π_w − m_w)ᵀ Θ_(w→z))),
//	B_t = Σ_(w observed with t) TV((π_w − m_w)ᵀ Θ_(w→t)),
//
// B_t stands in only when s = u moves a neighbour observed with t that
// depends on t (Pearson χ² of the table (w, t)), or moves none that was
// never observed with t: otherwise the change leaves s through routes B_t
// does not see, and B alone bounds it.
// TV half the L1 norm; z ranges over t and the first InfluenceSecond ranked
// neighbours of w, for the InfluenceRefine neighbours of largest TV (the
// others keep TV(π_w, m_w)). By data processing, the deviation of P(t | s =
// u) from P(t) is at most the deviation s = u passes through a separating
// neighbour, and Σ_v (p_v − m_v)² ≤ 2·TV²; the sum over neighbours covers
// several routes (exact as a bound for singly connected networks, a
// heuristic with loops). Two tests drop routes that are none. Common
// effect (the unshielded-collider test of the PC algorithm; Spirtes,
// Glymour & Scheines 2000): when s = u moves w (Pearson χ² of row u of
// (s, w) against m_w significant at ColliderLevel) but not another
// neighbour p (not significant), and that row of (s, p) rejects the chain's
// prediction π_wᵀ Θ_(w→p) (significant), w is a common effect of s and p;
// the route through w to p, or to a z that p separates from w (the part
// of (π_w − m_w)ᵀ Θ_(w→z) not passing through p within its delta-method
// noise), is dropped. Mediated neighbour: a moved w2 whose row the chain
// through a more moved w1 observed with t does not reject keeps, in B_t,
// only the part of its term the test could not see (w1's term over the
// table (w1, t) covers the rest; see explains). A chain's
// missing-signal term is scaled by D/E0, D = min(E0, κ·2·B², R) the bound
// on the target's squared distance from its marginal (the dependence a
// chain can miss), without the marginal's own variance Var(m̂_t): that is
// the error of answering m̂_t, which a chain does not answer with (it has
// its own variance term); a one-bridge chain s → w → t, which computes the
// route through w exactly, by min(E0, κ·2·(B_t − TV_w(d_t))², R)/E0 when w
// is observed with t (the routes it does not take; the terms are kept in
// the workspace with the ratio). Cost at most 2·InfluenceFirst + InfluenceRefine·(1 +
// InfluenceSecond) pair look-ups per unobserved-pair direct estimate, plus
// 2·ColliderTests for the tests and two per route tested against a common
// effect;
// docs/QUALITY.md has the derivation and the measurements.
//
// # Bound excess
//
// Where the influence or range bound applies (κ > 0, marginals), the
// conditional P(t | s = u) lies within √D_b of the target's marginal, D_b =
// min(κ·2·B², R) (the bounds only, not the prior's E0; the influence bound
// only when not cut short at E0), and m̂_t within about √Var(m̂_t) of the
// marginal. A chain estimate p̂ farther from m̂_t than ρ = √D_b +
// √Var(m̂_t) is biased by at least the excess (triangle inequality):
//
//	E = (‖p̂ − m̂_t‖ − ρ)₊².
//
// This sees a chain through a common effect whose causes were never
// observed together, which no table of the chain's own hops shows and the
// separation check cannot test (no table of the bridge's two neighbours).
// E and the separation bias λ·S are two estimates of the same squared bias,
// so the chain pays max(λ·S, E) (with the separation bias deferred,
// PendingBias adds the part of λ·S above E). ProjectReference moves a
// reference estimate onto the same ball (the router measures other chains
// against it: see ReferenceProjector). Derived, no constant; O(K_t) after
// the influence bound of the query's direct estimate.
//
// # Range bound
//
// Bayes' rule bounds how far any conditional can lie from the target's
// marginal given the two marginals alone: with P_u = P(s = u) and r = (1 −
// P_u)/P_u, p_v ≤ m_v/P_u and 1 − p_v ≤ (1 − m_v)/P_u, so p_v − m_v ≤ U_v =
// min(1 − m_v, m_v·r), m_v − p_v ≤ D_v = min(m_v, (1 − m_v)·r), and
//
//	Σ_v (p_v − m_v)² ≤ R = min(Σ_v max(U_v, D_v)², 2·min(Σ_v U_v, Σ_v D_v)²).
//
// E0 (after the influence bound) becomes min(E0, R + Var(m̂_t)), for every
// pair, and the missing-signal term's ratio D/E0 carries R too. A target
// value of small marginal cannot move far unless the observed value is rare
// (P(asia = yes | smoke = yes) in ASIA is within 0.01 of P(asia = yes) =
// 0.01, since P(smoke = yes) = 0.5). Derived, no constant; m̂ and P_u are the
// smoothed marginals of the statistics (α). O(K_s + K_t), no look-up beyond
// the two marginals.
//
// Cost O(Σ_k K_(k−1)·K_k·K_t + m·K²) = O(m·K³) time for K values per entity,
// O(m·K²) workspace, one allocation (Dist; none with Workspace.BorrowDist). The linearisation neglects terms
// of relative order 1/n (n the row counts): the exact posterior variance is
// the same sum with x_(k−1)[r]² replaced by E[x_(k−1)[r]²] (law of total
// variance, one edge at a time), so the delta value is a lower bound. With
// row totals ≥ 20 it stays within a few percent of a Monte Carlo of
// posterior draws; with rows of 1–8 counts it fell 8–17% short in the
// tests. WithVariance(ExactMoments) computes the exact value at the same
// O(m·K³) cost.
type Bayes struct {
	alpha, hopAlpha, beta, signalZ float64
	gamma, delta                   float64
	prior, separation, noiseK      float64
	spread, influence              float64
	variance                       Variance
}

// NewBayes returns the valued Dirichlet model: NewBayesFrom of
// DefaultBayesConfig with opts applied (BayesConfig.Apply). Options: WithAlpha (α > 0,
// default 1), WithBeta (β ≥ 0, default DefaultBeta), WithMissingSignal (γ ≥ 0,
// δ ∈ [0, 1], defaults DefaultMissingGamma, DefaultMissingDelta), WithSignalZ
// (z ≥ 0 of EdgeCost and of the signal bound, default DefaultSignalZ), WithVariance (DeltaMethod or
// ExactMoments, default DeltaMethod), WithPriorStrength (A > 0, default
// DefaultPriorStrength), WithSeparation (λ ≥ 0, default DefaultSeparation),
// WithNoiseK (k ≥ 0, default DefaultNoiseK), WithInfluence (κ ≥ 0, default
// DefaultInfluence).
// WithV0 and WithN0 belong to the support model and are rejected with
// ErrBadOption.
func NewBayes(opts ...Option) (*Bayes, error) {
	c, err := DefaultBayesConfig().Apply(opts...)
	if err != nil {
		return nil, err
	}
	return NewBayesFrom(c)
}

// Name returns "bayes".
func (b *Bayes) Name() string { return "bayes" }

// Variance returns the chain-variance method.
func (b *Bayes) Variance() Variance { return b.variance }

// HopAlpha returns the Dirichlet pseudo-count of a chain's hop tables.
func (b *Bayes) HopAlpha() float64 { return b.hopAlpha }

// Alpha returns the Dirichlet pseudo-count α.
func (b *Bayes) Alpha() float64 { return b.alpha }

// HopBias returns β.
func (b *Bayes) HopBias() float64 { return b.beta }

// UnseenSpread returns η of the unobserved-pair error.
func (b *Bayes) UnseenSpread() float64 { return b.spread }

// PriorStrength returns A of the empirical-Bayes direct prior.
func (b *Bayes) PriorStrength() float64 { return b.prior }

// Separation returns λ of the separation bias.
func (b *Bayes) Separation() float64 { return b.separation }

// Influence returns κ of the influence bound (0: off).
func (b *Bayes) Influence() float64 { return b.influence }

// NoiseK returns k of GainMargin.
func (b *Bayes) NoiseK() float64 { return b.noiseK }

// SignalZ returns z of EdgeCost.
func (b *Bayes) SignalZ() float64 { return b.signalZ }

// Posterior appends to dst the parameters of the Dirichlet posterior of
// P(t | s = u), N[u][v] + a_v (see "Direct estimate"; a_v = α without
// marginals), and returns the extended slice. With K_t = 2 it is a
// Beta posterior (BDA §2.4), which gives quantiles and intervals through
// gonum's stat/distuv. O(K_t).
func (b *Bayes) Posterior(dst []float64, st Stats, s graphidx.EntityID, u int, t graphidx.EntityID) ([]float64, error) {
	var ws Workspace
	if err := ws.setPath(st, s, u, nil, t); err != nil {
		return dst, err
	}
	ps, ok, err := pair(st, s, t, ws.ks[0], ws.ks[1])
	if err != nil {
		return dst, err
	}
	var sup uint64
	if ok {
		sup = ps.Support()
	}
	var pm [graphidx.MaxValues]float64
	prior := b.priorCounts(pm[:ws.ks[1]], st, t, sup)
	for v := 0; v < ws.ks[1]; v++ {
		c := 0.0
		if ok {
			c = float64(ps.Count(u, v))
		}
		dst = append(dst, c+prior[v])
	}
	return dst, nil
}

// HopRow appends to dst row r of the posterior-mean matrix that a chain's
// hop from a to c carries, (N[r][v] + α_h)/(n_r + K_c·α_h) with α_h the hop
// pseudo-count (WithHopAlpha; the uniform row when the pair was never
// observed together), and returns the extended slice: a chain's first
// forward vector x_1 = e_rᵀ M_1, which the direct estimate of (a, c) equals
// only when its prior is the same. O(K_a·K_c).
func (b *Bayes) HopRow(dst []float64, st Stats, a graphidx.EntityID, r int, c graphidx.EntityID) ([]float64, error) {
	var ws Workspace
	if err := ws.setPath(st, a, r, nil, c); err != nil {
		return dst, err
	}
	ka, kc := ws.ks[0], ws.ks[1]
	ps, ok, err := pair(st, a, c, ka, kc)
	if err != nil {
		return dst, err
	}
	th, ci := make([]float64, ka*kc), make([]float64, ka)
	fillMeans(th, ci, ps, ok, ka, kc, b.hopAlpha)
	return append(dst, th[r*kc:r*kc+kc]...), nil
}

// priorCounts fills pc (K_t entries) with the prior pseudo-counts of a
// direct estimate of t for a pair of support sup: w·A·m̂_v + (1 − w)·α with
// w = A/(A + sup) when st has the target's marginal (Marginals, K_t
// entries), else α each (see "Direct estimate"). It returns pc. O(K_t).
func (b *Bayes) priorCounts(pc []float64, st Stats, t graphidx.EntityID, sup uint64) []float64 {
	var marg []uint64
	if ms, ok := st.(Marginals); ok {
		marg = ms.Marginal(t)
	}
	if len(marg) != len(pc) {
		for v := range pc {
			pc[v] = b.alpha
		}
		return pc
	}
	tot := 0.0
	for _, c := range marg {
		tot += float64(c)
	}
	w := b.prior / (b.prior + float64(sup))
	scale := w * b.prior / (tot + float64(len(pc))*b.alpha)
	for v, c := range marg {
		pc[v] = (float64(c)+b.alpha)*scale + (1-w)*b.alpha
	}
	return pc
}

// Direct returns the posterior mean of P(t | s = u) and Err = Σ_v Var(θ_v)
// (see the type documentation, "Direct estimate"). Support is the pair
// support. A pair never observed gets the prior: Dist the target's smoothed
// marginal (uniform without marginals), Err the prior variance, Support 0.
// ws may be nil. O(K_s·K_t).
func (b *Bayes) Direct(ws *Workspace, st Stats, s graphidx.EntityID, u int, t graphidx.EntityID) (Estimate, error) {
	if st == nil {
		return Estimate{}, fmt.Errorf("%w: nil Stats", ErrBadStats)
	}
	if s == t {
		return Estimate{}, fmt.Errorf("%w: observed and target are both entity %d", ErrBadPath, s)
	}
	ks, err := numValues(st, s)
	if err != nil {
		return Estimate{}, err
	}
	kt, err := numValues(st, t)
	if err != nil {
		return Estimate{}, err
	}
	if u < 0 || u >= ks {
		return Estimate{}, fmt.Errorf("%w: value %d of entity %d, which has %d values", ErrValueRange, u, s, ks)
	}
	ps, ok, err := pair(st, s, t, ks, kt)
	if err != nil {
		return Estimate{}, err
	}
	var n, sup uint64
	if ok {
		sup = ps.Support()
	}
	var pm [graphidx.MaxValues]float64
	prior := b.priorCounts(pm[:kt], st, t, sup)
	dist := ws.newDist(kt)
	a := 0.0
	for v := range dist {
		dist[v] = prior[v]
		a += prior[v]
	}
	if ok {
		for v := range dist {
			c := ps.Count(u, v)
			n += uint64(c)
			dist[v] += float64(c)
		}
	}
	d := float64(n) + a
	inv := 1 / d
	sq := 0.0
	for v := range dist {
		dist[v] *= inv
		sq += dist[v] * dist[v]
	}
	e := max(0, (1-sq)/(d+1))
	var rt routeTerms
	e0Prior, e0, dep, bnd, ok, err := b.unseenErrs(st, s, u, t, kt, sup, &rt)
	if err != nil {
		return Estimate{}, err
	}
	if ok {
		r := 1.0
		if e0Prior > 0 {
			r = dep / e0Prior
		}
		ws.remember(st, s, u, t, r, bnd, &rt)
		// Shrinkage MSE: θ̂ = λ·N/n + (1 − λ)·a/a₀ with λ = n/(n + a₀).
		nf := float64(n)
		lam := nf / d
		e = (1 - lam) * (1 - lam) * e0
		if n > 0 {
			e += lam * lam * max(0, 1-sq) / nf
		}
	}
	return Estimate{Dist: dist, Err: e, Var: e, Support: sup}, nil
}

// unseenErr returns E0 = η·(1 − P̂(s = u))²·(1 − 1/K_t), the expected
// squared distance Σ_v (p_v − m_v)² of the conditional P(t | s = u) of a
// pair never observed together from the target's marginal (see "Direct
// estimate"), with P̂(s = u) = (c_u + α)/(Σ c + K_s α) from the observed
// entity's marginal counts c; ok is false without marginals (or when they
// do not have K_s entries). O(K_s).
func (b *Bayes) unseenErr(st Stats, s graphidx.EntityID, u, kt int) (float64, bool) {
	ms, ok := st.(Marginals)
	if !ok {
		return 0, false
	}
	c := ms.Marginal(s)
	if u < 0 || u >= len(c) || len(c) != st.NumValues(s) {
		return 0, false
	}
	tot := 0.0
	for _, x := range c {
		tot += float64(x)
	}
	share := (float64(c[u]) + b.alpha) / (tot + float64(len(c))*b.alpha)
	r := 1 - share
	return b.spread * r * r * (1 - 1/float64(kt)), true
}

// Chain returns p̂ = e_uᵀ M_1…M_(m+1) and Err = Σ_v Var(p̂_v) + β·m +
// γ·(δ − L)₊² + max(λ·S, E) (the missing-signal and separation biases and
// the bound excess; see the type documentation), the
// variance by the delta method or, with WithVariance(ExactMoments), exactly
// (see the type documentation and Variance). For m = 0 it is Direct (the
// empirical-Bayes prior included). Support is the smallest
// edge support; an edge never observed contributes the prior and support 0.
// ws may be nil (a temporary workspace is then allocated). O(m·K³).
func (b *Bayes) Chain(ws *Workspace, st Stats, s graphidx.EntityID, u int, bridges []graphidx.EntityID, t graphidx.EntityID) (Estimate, error) {
	if ws == nil {
		ws = new(Workspace)
	}
	if err := ws.setPath(st, s, u, bridges, t); err != nil {
		return Estimate{}, err
	}
	ws.sepWit = ws.sepWit[:0]
	if len(bridges) == 0 {
		ws.sepPending = false
		return b.Direct(ws, st, s, u, t)
	}
	var sig *Bayes
	if b.gamma > 0 && len(bridges) > 0 {
		sig = b
	}
	minSup, err := ws.loadEdges(st, b.hopAlpha, sig)
	if err != nil {
		return Estimate{}, err
	}
	m := len(bridges)
	bias := b.beta * float64(m)
	if sig != nil {
		if ms := b.missingSignal(ws.lb); ms > 0 {
			// The dependence a chain can miss is at most the target's
			// distance from its marginal: scaled with it (Influence bound).
			r, err := b.unseenRatio(ws, st, s, u, t, ws.ks[len(bridges)+1])
			if err != nil {
				return Estimate{}, err
			}
			// A one-bridge chain computes the route through its bridge
			// exactly: it can miss only the other routes of B_t.
			if len(bridges) == 1 && b.influence > 0 {
				if r1, ok := ws.inflTerms.withoutRoute(bridges[0], b.influence); ok {
					r = min(r, r1)
				}
			}
			bias += ms * r
		}
	}
	kt := ws.ks[m+1]
	dist := ws.newDist(kt)
	vr := growF(ws.vr, kt)
	ws.vr = vr
	clear(vr)

	// Forward pass: x_1 = row u of M_1, x_k = x_(k−1) M_k for k = 2..m.
	ws.xoff = growI(ws.xoff, m+1)
	xn := 0
	for k := 1; k <= m; k++ {
		ws.xoff[k-1] = xn
		xn += ws.ks[k]
	}
	ws.xoff[m] = xn
	ws.x = growF(ws.x, xn)
	k1 := ws.ks[1]
	copy(ws.x[:k1], ws.theta[u*k1:u*k1+k1])
	for k := 2; k <= m; k++ {
		kp, kc := ws.ks[k-1], ws.ks[k]
		ws.mul(ws.x[ws.xoff[k-1]:], kc, ws.x[ws.xoff[k-2]:], kp, ws.theta[ws.toff[k-1]:], kc, 1, kp, kc)
	}
	ws.sepPending = false
	// sep is the separation bias λ·S; it and the bound excess are two
	// estimates of the same invented dependence, so the chain pays the
	// larger (sepOrExcess), not both.
	sep := 0.0
	if b.separation > 0 {
		if ws.deferSep {
			ws.sepPending, ws.sepU, ws.sepM = true, u, m
		} else {
			sb, err := ws.separationBias(st, u, m, b.hopAlpha)
			if err != nil {
				return Estimate{}, err
			}
			sep = b.separation * sb
		}
	}
	if b.variance == ExactMoments {
		ws.exactMoments(u, m, dist, vr)
		ex, err := b.sepOrExcess(ws, st, s, u, t, kt, dist, sep)
		if err != nil {
			return Estimate{}, err
		}
		v := sumClamped(vr)
		return Estimate{Dist: dist, Err: v + bias + ex, Var: v, Support: minSup}, nil
	}

	// Backward pass. P holds [R_(k−1) | M_k(R_k∘R_k)] with stride 2K_t and
	// is turned into B_(k−1) = [R_(k−1) | R_(k−1)∘R_(k−1)] in place.
	maxRows := 0
	for k := 1; k <= m; k++ {
		maxRows = max(maxRows, ws.ks[k])
	}
	w2 := 2 * kt
	ws.bufA = growF(ws.bufA, maxRows*w2)
	ws.bufB = growF(ws.bufB, maxRows*w2)
	cur, nxt := ws.bufA, ws.bufB

	// k = m+1: R_(m+1) = I, so P = [M_(m+1) | M_(m+1)].
	{
		rows := ws.ks[m]
		th := ws.theta[ws.toff[m]:ws.toff[m+1]]
		ci := ws.cinv[ws.coff[m]:ws.coff[m+1]]
		x := ws.x[ws.xoff[m-1]:ws.xoff[m]]
		for r := 0; r < rows; r++ {
			wr := x[r] * x[r] * ci[r]
			src := th[r*kt : r*kt+kt]
			dst := cur[r*w2 : r*w2+w2]
			for v, q := range src {
				sq := q * q
				vr[v] += wr * (q - sq)
				dst[v] = q
				dst[kt+v] = sq
			}
		}
	}
	for k := m; k >= 1; k-- {
		kp, kc := ws.ks[k-1], ws.ks[k]
		var mk []float64
		var x []float64
		ci := ws.cinv[ws.coff[k-1]:ws.coff[k]]
		rows := kp
		if k == 1 {
			// Only row u matters: x_0 = e_u.
			mk = ws.theta[u*kc:]
			ci = ci[u : u+1]
			rows = 1
		} else {
			mk = ws.theta[ws.toff[k-1]:]
			x = ws.x[ws.xoff[k-2]:ws.xoff[k-1]]
		}
		ws.mul(nxt, w2, mk, kc, cur, w2, rows, kc, w2)
		for r := 0; r < rows; r++ {
			wr := ci[r]
			if x != nil {
				wr *= x[r] * x[r]
			}
			p := nxt[r*w2 : r*w2+w2]
			for v := 0; v < kt; v++ {
				rv := p[v]
				sq := rv * rv
				vr[v] += wr * (p[kt+v] - sq)
				p[kt+v] = sq
			}
		}
		cur, nxt = nxt, cur
	}
	copy(dist, cur[:kt]) // row u of R_0 = M_1 R_1 is p̂
	ex, err := b.sepOrExcess(ws, st, s, u, t, kt, dist, sep)
	if err != nil {
		return Estimate{}, err
	}
	v := sumClamped(vr)
	return Estimate{Dist: dist, Err: v + bias + ex, Var: v, Support: minSup}, nil
}

// PendingBias returns the separation bias that the last Chain call with
// ws left out under Workspace.DeferSeparation, max(0, λ·S − E) beyond the
// bound excess E that call charged (so the chain pays max(λ·S, E) in all;
// 0 when none is pending:
// the check is off, the chain had no bridges, or it was already returned),
// and clears it. It reads the path, edges and forward vectors that call
// loaded, so it must come before any other call with ws and with the same
// statistics. Cost as the check itself (see "Separation check").
func (b *Bayes) PendingBias(ws *Workspace, st Stats) (float64, error) {
	if ws == nil || !ws.sepPending {
		return 0, nil
	}
	ws.sepPending = false
	sb, err := ws.separationBias(st, ws.sepU, ws.sepM, b.hopAlpha)
	if err != nil {
		return 0, err
	}
	// The chain paid its bound excess already; the two estimate the same
	// bias, so only the part of λ·S above it is added (see sepOrExcess).
	return max(0, b.separation*sb-ws.sepEx), nil
}

// sepOrExcess returns max(sep, E), E the bound excess of the chain's
// estimate dist (boundExcess): the separation bias λ·S and E are two lower
// estimates of the one squared bias a chain that does not screen its
// endpoints off carries (the dependence it invents), so the chain is
// charged the larger, not their sum. With the separation bias deferred
// (Workspace.DeferSeparation) sep is 0 here and E is kept in ws, so that
// PendingBias adds only max(0, λ·S − E). Cost that of boundExcess.
func (b *Bayes) sepOrExcess(ws *Workspace, st Stats, s graphidx.EntityID, u int, t graphidx.EntityID, kt int, dist []float64, sep float64) (float64, error) {
	ex, err := b.boundExcess(ws, st, s, u, t, kt, dist)
	if err != nil {
		return 0, err
	}
	ws.sepEx = ex
	return max(sep, ex), nil
}

// mulSmall is the widest product row (n) that mul computes with matMul;
// wider rows go to gonum, whose assembly axpy is faster there (measured:
// K=2 chains 1.3–1.9× faster with matMul, K=64 1.7× slower, K=8 even).
const mulSmall = 16

// mul sets c = a·b (see matMul for the layout) by matMul for narrow
// products and by mat.Dense.Mul otherwise; both give the same bits.
func (ws *Workspace) mul(c []float64, ldc int, a []float64, lda int, b []float64, ldb int, r, k, n int) {
	if n <= mulSmall {
		matMul(c, ldc, a, lda, b, ldb, r, k, n)
		return
	}
	dense(&ws.hC, c, r, n, ldc).Mul(dense(&ws.hA, a, r, k, lda), dense(&ws.hB, b, k, n, ldb))
}

// matMul sets the r×n matrix c (row stride ldc) to a·b for the r×k matrix
// a (stride lda) and the k×n matrix b (stride ldb). It adds the terms in the
// order of gonum's serial Dgemm (row i of c starts at 0 and accumulates
// a[i,l]·b[l,:] for l = 0…k−1, skipping a[i,l] = 0, each product rounded
// before the sum), so the result is bit for bit that of mat.Dense.Mul on
// these sizes (K ≤ graphidx.MaxValues keeps gonum serial), without its
// per-call shape checks and overlap tests, which dominate for the small
// products of a chain with few values. O(r·k·n), no allocation.
func matMul(c []float64, ldc int, a []float64, lda int, b []float64, ldb int, r, k, n int) {
	for i := 0; i < r; i++ {
		ci := c[i*ldc : i*ldc+n]
		clear(ci)
		for l, v := range a[i*lda : i*lda+k] {
			if v == 0 {
				continue
			}
			bl := b[l*ldb : l*ldb+n]
			for j := range ci {
				ci[j] += float64(v * bl[j]) // explicit rounding: no fused multiply-add
			}
		}
	}
}

// sumClamped returns Σ max(0, x_i); each term is a variance that rounding
// may push a hair below zero.
func sumClamped(xs []float64) float64 {
	s := 0.0
	for _, x := range xs {
		if x > 0 {
			s += x
		}
	}
	return s
}

// exactMoments runs the ExactMoments recursion (see Variance) for a path
// of m ≥ 1 bridges whose means, row factors and forward vectors x̄_1..x̄_m
// are loaded. It writes p̂ into dist and C_(m+1)[v,v] into vr. O(m·K³).
func (ws *Workspace) exactMoments(u, m int, dist, vr []float64) {
	kmax := 0
	for _, k := range ws.ks {
		kmax = max(kmax, k)
	}
	ws.bufA = growF(ws.bufA, kmax*kmax) // C
	ws.bufB = growF(ws.bufB, kmax*kmax) // Y = (C − W) M̄
	ws.mt = growF(ws.mt, kmax*kmax)     // M̄ᵀ
	ws.w = growF(ws.w, kmax)
	C, Y, mt, w := ws.bufA, ws.bufB, ws.mt, ws.w

	// C_1 = (diag θ − θᵀθ)/c for θ = row u of M_1.
	k1 := ws.ks[1]
	th := ws.theta[u*k1 : u*k1+k1]
	c := ws.cinv[u]
	for i, ti := range th {
		for j, tj := range th {
			C[i*k1+j] = -c * ti * tj
		}
		C[i*k1+i] += c * ti
	}
	for k := 2; k <= m+1; k++ {
		kp, kc := ws.ks[k-1], ws.ks[k]
		x := ws.x[ws.xoff[k-2]:ws.xoff[k-1]] // x̄_(k−1)
		ci := ws.cinv[ws.coff[k-1]:ws.coff[k]]
		mkData := ws.theta[ws.toff[k-1]:ws.toff[k]]
		for r := 0; r < kp; r++ {
			w[r] = (C[r*kp+r] + x[r]*x[r]) * ci[r]
			C[r*kp+r] -= w[r]
		}
		mk := dense(&ws.hB, mkData, kp, kc, kc)
		dense(&ws.hC, Y, kp, kc, kc).Mul(dense(&ws.hA, C, kp, kp, kp), mk)
		if k == m+1 {
			// Only the diagonal of C_(m+1) is needed:
			// C[v,v] = Σ_r M̄[r,v]·Y[r,v] + Σ_r w_r M̄[r,v].
			for r := 0; r < kp; r++ {
				for v := 0; v < kc; v++ {
					vr[v] += mkData[r*kc+v] * (Y[r*kc+v] + w[r])
				}
			}
			// p̂ = x̄_m M̄_(m+1).
			dense(&ws.hC, dist, 1, kc, kc).Mul(dense(&ws.hA, x, 1, kp, kp), mk)
			return
		}
		// C_k = M̄ᵀ Y + diag(M̄ᵀ w), with M̄ᵀ copied so that mat.Dense.Mul
		// needs no transpose view.
		for r := 0; r < kp; r++ {
			for v := 0; v < kc; v++ {
				mt[v*kp+r] = mkData[r*kc+v]
			}
		}
		dense(&ws.hC, C, kc, kc, kc).Mul(dense(&ws.hA, mt, kc, kp, kp), dense(&ws.hB, Y, kp, kc, kc))
		for v := 0; v < kc; v++ {
			s := 0.0
			for r := 0; r < kp; r++ {
				s += mt[v*kp+r] * w[r]
			}
			C[v*kc+v] += s
		}
	}
}
