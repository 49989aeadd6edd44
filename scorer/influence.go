package scorer

import (
	"fmt"
	"math"
	"reflect"

	"github.com/hopwise/hopwise/graphidx"
)

// Sizes of the influence bound (see Bayes, "Influence bound"):
// InfluenceFirst is the most neighbours the observed entity may have for
// the bound to apply (all of them are read: the bound assumes every route
// out of the entity starts at a neighbour it read); InfluenceRefine is how
// many of them, those of largest TV(π_w, m_w), are refined to their two-hop
// deviation, over the target and the first InfluenceSecond ranked
// neighbours of w. Together they keep the bound at most 2·InfluenceFirst +
// InfluenceRefine·(1 + InfluenceSecond) = 24 pair look-ups per direct
// estimate.
const (
	InfluenceFirst  = 8
	InfluenceSecond = 3
	InfluenceRefine = 2
)

// influenceBound returns min(B, B_t)², the squared influence bound of the
// observed value s = u on the target t (see Bayes, "Influence bound"):
//
//	B   = Σ_w min(TV(π_w, m_w), max_z TV(d_z)),   d_z = (π_w − m_w)ᵀ Θ_(w→z),
//	B_t = Σ_(w observed with t) TV(d_t),
//
// w over every neighbour of s (at most InfluenceFirst, else ok is false), z
// over t and the first InfluenceSecond ranked neighbours of w other than s
// for the InfluenceRefine neighbours of largest TV(π_w, m_w) (the others
// keep that TV, an upper bound of their term); π_w = P̂(w | s = u) is row u
// of the pair (s, w)'s posterior means, m_w = P̂(w) the smoothed marginal of
// w, Θ_(w→z) the posterior-mean matrix of the pair (w, z) and TV half the L1
// norm. Two tests on the tables read drop terms (see Bayes, "Influence
// bound"): a route through a common effect w of s and another neighbour p
// (colliderAt) to p or to a z on p's side of w (behind) is no route; and a
// moved neighbour whose change a more moved neighbour observed with t
// explains (explains) keeps in B_t only the part the test could not see.
// B_t is used only when s = u moves (X² significant) a neighbour observed
// with t, or moves no neighbour that was never observed with t: otherwise
// the change leaves s through neighbours whose routes to t B_t cannot see,
// and B alone bounds it. A result with 2·B² ≥ stop may
// be cut short (the caller's cap cannot bind). ok is false when st lacks ranked neighbours, neighbour
// lists or marginals, or no neighbour of s has a table and a marginal.
// Cost as InfluenceFirst says plus at most 2·ColliderTests tables for the
// tests and two per blocked route, O(K³) arithmetic per look-up, no
// allocation.
func (b *Bayes) influenceBound(st Stats, s graphidx.EntityID, u int, t graphidx.EntityID, stop float64, rt *routeTerms) (float64, bool, error) {
	rn, ok := st.(RankedNeighborer)
	if !ok {
		return 0, false, nil
	}
	nl, ok := st.(NeighborLister)
	if !ok {
		return 0, false, nil
	}
	first := nl.Neighbors(s)
	if len(first) > InfluenceFirst {
		return 0, false, nil
	}
	ms, ok := st.(Marginals)
	if !ok {
		return 0, false, nil
	}
	ks := st.NumValues(s)
	if u < 0 || u >= ks {
		return 0, false, nil
	}
	// Pass 1: π_w, m_w, TV(π_w, m_w) and the X² of row u against m_w for
	// every neighbour w; the TV bounds every two-hop deviation through w.
	var nb [InfluenceFirst]inflNeighbour
	var tvs, tvT [InfluenceFirst]float64
	var seenT [InfluenceFirst]bool
	var out [graphidx.MaxValues]float64
	// Every pass-1 read up front, in loops whose loads are independent
	// (their cache misses overlap): the neighbours' value counts and
	// marginals, and, with a PairPrefetcher, the pairs (s, w) and (w, t).
	// The loop below reads the same values again (mTots: each marginal's
	// smoothed total, summed here as there); nothing else changes.
	var kws [InfluenceFirst]int
	var mws [InfluenceFirst][]uint64
	var mTots [InfluenceFirst]float64
	pf, _ := st.(PairPrefetcher)
	// Three loops: the value counts and the marginals' places, then the
	// marginals' counts, then the pairs. Queueing a pair is long enough
	// that in one loop with the reads the next neighbour's reads waited
	// for it (docs/SEARCH.md, ninth round: 0.15–0.72 µs per decision).
	for i, w := range first {
		kws[i] = st.NumValues(w)
		mws[i] = ms.Marginal(w)
	}
	for i := range first {
		mTots[i] = float64(kws[i]) * b.alpha
		for _, c := range mws[i] {
			mTots[i] += float64(c)
		}
	}
	if pf != nil {
		for _, w := range first {
			if w != s {
				pf.WantPair(s, w, graphidx.NoPairHint)
				pf.WantPair(w, t, graphidx.NoPairHint)
			}
		}
		pf.FetchPairs()
	}
	n := 0
	for fi, w := range first {
		if w == s {
			continue
		}
		kw := kws[fi]
		if kw < 1 || kw > graphidx.MaxValues {
			continue
		}
		ps, ok, err := pair(st, s, w, ks, kw)
		if err != nil {
			return 0, false, err
		}
		if !ok {
			continue
		}
		mw := mws[fi]
		if len(mw) != kw {
			continue
		}
		e := &nb[n]
		e.id, e.k, e.ps, e.partner = w, kw, ps, -1
		e.n = float64(ps.RowSum(u))
		rowTot := e.n + float64(kw)*b.alpha
		mTot := mTots[fi] // float64(kw)·α + Σ mw
		tvw := 0.0
		for v := 0; v < kw; v++ {
			e.pi[v] = (float64(ps.Count(u, v)) + b.alpha) / rowTot
			e.mw[v] = (float64(mw[v]) + b.alpha) / mTot
			e.d[v] = e.pi[v] - e.mw[v]
			if e.d[v] > 0 {
				tvw += e.d[v]
			}
		}
		e.x2 = rowFit(ps, u, e.mw[:kw], e.n)
		tvs[n] = tvw
		// Through w straight to the target, when w was observed with it.
		tv, ok, err := b.twoHop(st, w, kw, t, e.dev(), out[:])
		if err != nil {
			return 0, false, err
		}
		tvT[n], seenT[n] = min(tv, tvw), ok
		n++
	}
	if n == 0 {
		return 0, false, nil
	}
	// Order by TV, descending (n ≤ InfluenceFirst).
	var idx [InfluenceFirst]int
	for i := range n {
		idx[i] = i
		for j := i; j > 0 && tvs[idx[j]] > tvs[idx[j-1]]; j-- {
			idx[j], idx[j-1] = idx[j-1], idx[j]
		}
	}
	// Common effects: a neighbour w that s = u moves, tested against the
	// neighbours p that s = u does not move, the most moved w first, at
	// most ColliderTests tables (w, p).
	tests := 0
	for _, i := range idx[:n] {
		if tests == ColliderTests {
			break
		}
		if !significant(nb[i].x2, nb[i].k) {
			continue
		}
		for j := n - 1; j >= 0 && tests < ColliderTests; j-- {
			pj := idx[j]
			if pj == i || nb[pj].n == 0 || significant(nb[pj].x2, nb[pj].k) {
				continue
			}
			tests++
			ok, err := b.colliderAt(st, nb[:n], i, pj, u)
			if err != nil {
				return 0, false, err
			}
			if ok {
				nb[i].partner = pj
				break
			}
		}
	}
	// Mediated neighbours: a moved neighbour w2 whose change a neighbour
	// w1 of larger TV, itself observed with the target and not mediated,
	// explains; of w2's route to the target only the part the test could
	// not see remains, dmin·TV(d_t)/TV(π_w2, m_w2) (the route's
	// contraction applied to the undetected residual); the rest is part of
	// w1's term. At most ColliderTests tables (w1, w2).
	var mediated [InfluenceFirst]bool
	var termT [InfluenceFirst]float64 // each neighbour's term of B_t
	copy(termT[:n], tvT[:n])
	tests = 0
	for a, i := range idx[:n] {
		if tests == ColliderTests {
			break
		}
		if mediated[i] || !seenT[i] || !significant(nb[i].x2, nb[i].k) {
			continue
		}
		for _, j := range idx[a+1 : n] {
			if tests == ColliderTests {
				break
			}
			if mediated[j] || !seenT[j] || !significant(nb[j].x2, nb[j].k) {
				continue
			}
			tests++
			dmin, ok, err := b.explains(st, nb[:n], i, j, u)
			if err != nil {
				return 0, false, err
			}
			if ok && tvs[j] > 0 {
				mediated[j] = true
				termT[j] = min(tvT[j], dmin*tvT[j]/tvs[j])
			}
		}
	}
	// B_t rests on t being reached through a neighbour observed with it.
	// When s = u moves a neighbour never observed with t, and no neighbour
	// both moved by s = u (X² of row u) and dependent on t (X² of the table
	// (w, t), dependent), nothing shows such a route: the tables with t
	// carry no change of s, and the change s does make leaves through a
	// neighbour whose routes to t B_t does not see. Then B_t is no bound,
	// and B alone is used.
	movedUnseen := false
	for i := range n {
		movedUnseen = movedUnseen || (!seenT[i] && significant(nb[i].x2, nb[i].k))
	}
	reach := !movedUnseen
	for i := 0; i < n && !reach; i++ {
		if !seenT[i] || !significant(nb[i].x2, nb[i].k) {
			continue
		}
		pt, ok, err := pair(st, nb[i].id, t, nb[i].k, st.NumValues(t))
		if err != nil {
			return 0, false, err
		}
		reach = ok && dependent(pt)
	}
	tsum, tseen := 0.0, false
	for i := range n {
		if !seenT[i] || !reach {
			continue
		}
		tseen = true
		blocked, err := b.behind(st, nb[:n], i, t)
		if err != nil {
			return 0, false, err
		}
		if blocked {
			termT[i] = 0
		}
		tsum += termT[i]
	}
	if rt != nil && tseen {
		rt.ok, rt.n, rt.sum = true, n, tsum
		for i := range n {
			rt.id[i], rt.term[i], rt.seen[i] = nb[i].id, termT[i], seenT[i]
		}
	}
	if tseen && 2*tsum*tsum < stop {
		stop = 2 * tsum * tsum // the refinement below matters only below it
	}
	// Pass 2: the InfluenceRefine neighbours of largest TV get their
	// two-hop deviation: to the target itself when w was observed with it,
	// and to w's first InfluenceSecond ranked neighbours, except those
	// behind a common effect. The rest keep their TV.
	refine := min(InfluenceRefine, n)
	rest := 0.0
	for _, i := range idx[refine:n] {
		rest += tvs[i]
	}
	if 2*rest*rest >= stop {
		return min(rest*rest, stop/2), true, nil // the refinement cannot go below stop
	}
	sum := rest
	if pf != nil {
		// The pairs (w, z) of the loop below: z ranges over the first
		// InfluenceSecond ranked neighbours of w that are not s, w or t
		// (each is observed with w, so each is read), named by entry.
		for _, i := range idx[:refine] {
			w, second := nb[i].id, 0
			for j, z := range rn.RankedNeighbors(w) {
				if second == InfluenceSecond {
					break
				}
				if z == s || z == w || z == t {
					continue
				}
				second++
				st.NumValues(z) // read ahead, as the pair
				pf.WantPair(w, z, uint32(j))
			}
		}
		pf.FetchPairs()
	}
	for _, i := range idx[:refine] {
		w, kw := nb[i].id, nb[i].k
		dev := nb[i].dev()
		best := 0.0
		if seenT[i] {
			best = termT[i]
		}
		second := 0
		for _, z := range rn.RankedNeighbors(w) {
			if second == InfluenceSecond {
				break
			}
			if z == s || z == w || z == t {
				continue
			}
			tv, ok, err := b.twoHop(st, w, kw, z, dev, out[:])
			if err != nil {
				return 0, false, err
			}
			if !ok {
				continue
			}
			second++
			blocked, err := b.behind(st, nb[:n], i, z)
			if err != nil {
				return 0, false, err
			}
			if !blocked {
				best = max(best, tv)
			}
		}
		sum += min(best, tvs[i])
	}
	if tseen {
		sum = min(sum, tsum)
	}
	return sum * sum, true, nil
}

// routeTerms records, for one query (s = u, t) whose pair was never
// observed together, the terms of B_t that the influence bound summed: for
// each neighbour w of s observed with t, its route's term TV(d_t) (after the
// common-effect and mediation tests), with E0's prior and the range bound
// R (+Inf without). withoutRoute uses them to bound
// what a one-bridge chain through w can miss (see Bayes, "Influence
// bound"). ok is false when B_t was not computed in full.
type routeTerms struct {
	ok         bool
	n          int
	id         [InfluenceFirst]graphidx.EntityID
	term       [InfluenceFirst]float64
	seen       [InfluenceFirst]bool
	sum        float64
	prior, rng float64
}

// withoutRoute returns the ratio D_w/E0_prior for a one-bridge chain
// s → w → t, D_w = min(E0_prior, κ·2·(B_t − TV_w(d_t))², R): the chain
// computes the route through w exactly (its estimate's distance from the
// marginal is that route's deviation), so the dependence it can miss is
// the rest of B_t (0 when w is the only route). ok is false when the terms are not
// recorded or w is not among the neighbours observed with t. O(InfluenceFirst).
func (rt *routeTerms) withoutRoute(w graphidx.EntityID, kappa float64) (float64, bool) {
	if !rt.ok || !(rt.prior > 0) {
		return 0, false
	}
	for i := range rt.n {
		if rt.id[i] != w || !rt.seen[i] {
			continue
		}
		rest := max(0, rt.sum-rt.term[i])
		return min(rt.prior, kappa*2*rest*rest, rt.rng) / rt.prior, true
	}
	return 0, false
}

// unseenErrs returns the prior error E0 of an unobserved pair (unseenErr)
// and the error after the influence bound, min(E0, κ·2·B² + Var(m̂_t)) when
// sup = 0 and the bound applies (marginalVar), else E0 again (see Bayes, "Influence bound"),
// then capped by the range bound, min(·, R + Var(m̂_t)) (rangeBound; for
// every pair: E0 is the prior's distance from the marginal whatever the
// support). dep is the same without Var(m̂_t), min(E0, κ·2·B², R): the
// bound on the target's squared distance from its marginal, the dependence
// a chain's missing-signal term scales with. bnd is the part of it that is
// a bound and not the prior's expectation, min(κ·2·B², R) (+Inf when
// neither applies, or when the influence bound was cut short at E0): the
// bound excess of a chain (Bayes.boundExcess) is measured against it. ok is
// false without marginals. Cost that of influenceBound when
// sup = 0, plus O(K_s + K_t).
//
// rt, when not nil, receives the route terms of B_t (routeTerms).
func (b *Bayes) unseenErrs(st Stats, s graphidx.EntityID, u int, t graphidx.EntityID, kt int, sup uint64, rt *routeTerms) (prior, e0, dep, bnd float64, ok bool, err error) {
	if rt != nil {
		rt.ok = false
	}
	prior, ok = b.unseenErr(st, s, u, kt)
	if !ok {
		return 0, 0, 0, 0, false, nil
	}
	e0, dep, bnd = prior, prior, math.Inf(1)
	if sup == 0 && b.influence > 0 && prior > 0 {
		bb, ok, err := b.influenceBound(st, s, u, t, prior/b.influence, rt)
		if err != nil {
			return 0, 0, 0, 0, false, err
		}
		if ok {
			// The marginal's own error adds its posterior variance.
			dep = min(prior, b.influence*2*bb)
			e0 = min(prior, b.influence*2*bb+b.marginalVar(st, t, kt))
			if b.influence*2*bb < prior {
				// Not cut short (influenceBound stops at prior/κ).
				bnd = b.influence * 2 * bb
			}
		}
	}
	rng := math.Inf(1)
	if rb, ok := b.rangeBound(st, s, u, t, kt); ok {
		rng = rb
		dep = min(dep, rb)
		bnd = min(bnd, rb)
		e0 = min(e0, rb+b.marginalVar(st, t, kt))
	}
	if rt != nil && rt.ok {
		rt.prior, rt.rng = prior, rng
	}
	return prior, e0, dep, bnd, true, nil
}

// marginalVar returns (1 − Σ_v m̂_v²)/(N + K_t α + 1), the posterior
// variance (summed over values) of the target's smoothed marginal m̂ from
// its N marginal counts: the part of the marginal's squared error that
// remains when the target does not depend on the observed value at all. 0
// without marginals of K_t entries. O(K_t).
func (b *Bayes) marginalVar(st Stats, t graphidx.EntityID, kt int) float64 {
	ms, ok := st.(Marginals)
	if !ok {
		return 0
	}
	c := ms.Marginal(t)
	if len(c) != kt {
		return 0
	}
	tot := float64(kt) * b.alpha
	for _, x := range c {
		tot += float64(x)
	}
	sq := 0.0
	for _, x := range c {
		m := (float64(x) + b.alpha) / tot
		sq += m * m
	}
	return max(0, 1-sq) / (tot + 1)
}

// remember records r = D/E0_prior (unseenErrs' dep over its prior) and the
// bound bnd (unseenErrs) of the query (s = u, t) over st in ws,
// for the Chain calls that follow (unseenRatio). ws may be nil. O(1).
// rt (may be nil: none recorded) is kept with it for Chain's one-bridge
// chains (routeTerms.withoutRoute).
func (ws *Workspace) remember(st Stats, s graphidx.EntityID, u int, t graphidx.EntityID, r, bnd float64, rt *routeTerms) {
	if ws == nil {
		return
	}
	ws.inflOK, ws.inflSt, ws.inflS, ws.inflU, ws.inflT, ws.inflRatio = true, st, s, u, t, r
	ws.inflBnd = bnd
	ws.inflTerms.ok = false
	if rt != nil {
		ws.inflTerms = *rt
	}
}

// unseenRatio returns r = D/E0_prior ∈ [0, 1] for the query (s = u, t):
// the factor by which the influence bound shrinks the missing-signal bias
// of a chain (see Bayes, "Influence bound"); 1 when the pair was observed
// together, without marginals or with the bound off. It reuses the value
// that the last Direct (or Chain) call with ws recorded for the same query
// and the same Stats value, else computes and records it. O(1) when
// recorded, else one pair look-up plus influenceBound.
func (b *Bayes) unseenRatio(ws *Workspace, st Stats, s graphidx.EntityID, u int, t graphidx.EntityID, kt int) (float64, error) {
	if b.influence == 0 {
		return 1, nil
	}
	if ws.inflOK && ws.inflS == s && ws.inflU == u && ws.inflT == t && sameStats(ws.inflSt, st) {
		return ws.inflRatio, nil
	}
	ks := ws.ks[0]
	ps, ok, err := pair(st, s, t, ks, kt)
	if err != nil {
		return 0, err
	}
	var sup uint64
	if ok {
		sup = ps.Support()
	}
	r := 1.0
	var rt routeTerms
	prior, _, dep, bnd, ok, err := b.unseenErrs(st, s, u, t, kt, sup, &rt)
	if err != nil {
		return 0, err
	}
	if ok && prior > 0 {
		r = dep / prior
	}
	if !ok {
		bnd = math.Inf(1)
	}
	ws.remember(st, s, u, t, r, bnd, &rt)
	return r, nil
}

// sameStats reports whether a and b are the same Stats value; values of a
// type that cannot be compared are never the same (so a Workspace never
// reuses a recorded ratio for them). O(1).
func sameStats(a, b Stats) bool {
	ta := reflect.TypeOf(a)
	if ta == nil || ta != reflect.TypeOf(b) || !ta.Comparable() {
		return false
	}
	return a == b
}

// twoHop returns TV(d_z), d_z = devᵀ Θ_(w→z) with Θ the posterior means of
// the pair (w, z), using out (≥ K_z entries) as scratch; ok is false when
// the pair was never observed; err reports a pair whose shape does not
// match the request (ErrBadStats). O(K_w·K_z) and one pair look-up.
func (b *Bayes) twoHop(st Stats, w graphidx.EntityID, kw int, z graphidx.EntityID, dev, out []float64) (float64, bool, error) {
	kz := st.NumValues(z)
	if kz < 1 || kz > graphidx.MaxValues {
		return 0, false, nil
	}
	pz, ok, err := pair(st, w, z, kw, kz)
	if err != nil || !ok {
		return 0, false, err
	}
	clear(out[:kz])
	for r := 0; r < kw; r++ {
		if dev[r] == 0 {
			continue
		}
		f := dev[r] / (float64(pz.RowSum(r)) + float64(kz)*b.alpha)
		for v := 0; v < kz; v++ {
			out[v] += f * (float64(pz.Count(r, v)) + b.alpha)
		}
	}
	tv := 0.0
	for _, d := range out[:kz] {
		if d > 0 {
			tv += d
		}
	}
	return tv, true, nil
}

// NeighborLister is an optional interface of a Stats: every entity observed
// with id (in any order). *graphidx.Index satisfies it. With it the Bayes
// model bounds an unobserved pair's error by the observed value's influence
// (see Bayes, "Influence bound").
type NeighborLister interface {
	Neighbors(id graphidx.EntityID) []graphidx.EntityID
}

// boundBall returns the centre m̂_t (the target's smoothed marginal, in
// out) and the radius ρ = √bnd + √Var(m̂_t) of the ball in which the
// conditional P(t | s = u) must lie by the bound bnd on ‖P(t | s = u) −
// P(t)‖² (min(κ·2·B², R), unseenErrs): ‖p − m‖ ≤ √bnd, with ‖m − m̂‖ at its
// root mean square √Var(m̂_t) (marginalVar). ok is false when the bound
// does not apply (it needs the influence bound on, κ > 0, and marginals of
// K_t entries). Cost that of unseenRatio (O(1) after Direct or Chain with
// the same workspace and query) plus O(K_t).
func (b *Bayes) boundBall(ws *Workspace, st Stats, s graphidx.EntityID, u int, t graphidx.EntityID, kt int, out []float64) (rho float64, ok bool, err error) {
	if b.influence == 0 || ws == nil {
		return 0, false, nil
	}
	if _, err := b.unseenRatio(ws, st, s, u, t, kt); err != nil {
		return 0, false, err
	}
	bnd := ws.inflBnd
	if math.IsInf(bnd, 1) || !(bnd >= 0) {
		return 0, false, nil
	}
	ms, ok := st.(Marginals)
	if !ok {
		return 0, false, nil
	}
	c := ms.Marginal(t)
	if len(c) != kt || len(out) < kt {
		return 0, false, nil
	}
	tot := float64(kt) * b.alpha
	for _, x := range c {
		tot += float64(x)
	}
	for v, x := range c {
		out[v] = (float64(x) + b.alpha) / tot
	}
	return math.Sqrt(bnd) + math.Sqrt(b.marginalVar(st, t, kt)), true, nil
}

// boundExcess returns (‖p̂ − m̂_t‖ − ρ)₊², the squared bias a chain's
// estimate p̂ of t given s = u must carry because it lies outside the ball
// of radius ρ around the target's smoothed marginal m̂_t that the bound
// allows (boundBall): by the triangle inequality ‖p̂ − p‖ ≥ ‖p̂ − m̂‖ −
// ‖p − m̂‖. A chain through a common effect whose causes were never
// observed together invents a dependence that the tables of its own hops
// cannot show; the bound, read from the observed entity's neighbours, can.
// 0 when the bound does not apply or the estimate lies within it. Cost as
// boundBall.
func (b *Bayes) boundExcess(ws *Workspace, st Stats, s graphidx.EntityID, u int, t graphidx.EntityID, kt int, dist []float64) (float64, error) {
	var m [graphidx.MaxValues]float64
	rho, ok, err := b.boundBall(ws, st, s, u, t, kt, m[:])
	if err != nil || !ok || len(dist) != kt {
		return 0, err
	}
	d2 := 0.0
	for v := range kt {
		d := dist[v] - m[v]
		d2 += d * d
	}
	ex := math.Sqrt(d2) - rho
	if ex <= 0 {
		return 0, nil
	}
	return ex * ex, nil
}

// refRounding is how far outside [0, 1] ProjectReference accepts a
// reference value as the rounding of a product of stochastic matrices (a
// chain's estimate came out 1.0000000000000002 on the router's 1M-entity
// benchmark, and the decision failed).
const refRounding = 1e-12

// ProjectReference implements ReferenceProjector: it moves ref, an estimate
// of t given s = u, onto the ball of radius ρ around m̂_t that the bound
// allows (boundBall), ref ← m̂ + (ref − m̂)·min(1, ρ/‖ref − m̂‖). The ball is
// convex and holds the truth, so the projection is never farther from the
// truth than ref (projection onto a closed convex set is non-expansive,
// common fact), and it stays on the probability simplex (a point of the
// segment from m̂ to ref). A reference within the ball, or a query without
// the bound, is left as it is. ws should hold the query's last Chain or
// Direct call (else the bound is recomputed); call it after PendingBias of
// that Chain (it resets the path's first cardinality). A reference value
// outside [0, 1] by more than refRounding (NaN included) is ErrBadEstimate;
// one within it is clamped to [0, 1] in ref. ErrBadStats for a reference
// of the wrong length. Cost as boundBall plus O(K_t).
func (b *Bayes) ProjectReference(ws *Workspace, st Stats, s graphidx.EntityID, u int, t graphidx.EntityID, ref []float64) error {
	if st == nil {
		return fmt.Errorf("%w: nil Stats", ErrBadStats)
	}
	kt := st.NumValues(t)
	if len(ref) != kt || kt < 1 || kt > graphidx.MaxValues {
		return fmt.Errorf("%w: reference of %d values for entity %d, which has %d", ErrBadStats, len(ref), t, kt)
	}
	for v, x := range ref {
		if !(x >= -refRounding && x <= 1+refRounding) {
			return fmt.Errorf("%w: reference value %d is %v, not a probability", ErrBadEstimate, v, x)
		}
		ref[v] = min(1, max(0, x))
	}
	ks := st.NumValues(s)
	if u < 0 || u >= ks {
		return fmt.Errorf("%w: value %d of entity %d, which has %d values", ErrValueRange, u, s, ks)
	}
	if ws == nil {
		ws = new(Workspace)
	}
	// unseenRatio reads K_s from the loaded path when it must recompute.
	if len(ws.ks) == 0 {
		ws.ks = append(ws.ks, ks)
	} else {
		ws.ks[0] = ks
	}
	var m [graphidx.MaxValues]float64
	rho, ok, err := b.boundBall(ws, st, s, u, t, kt, m[:])
	if err != nil || !ok {
		return err
	}
	d2 := 0.0
	for v := range kt {
		d := ref[v] - m[v]
		d2 += d * d
	}
	d := math.Sqrt(d2)
	if d <= rho {
		return nil
	}
	f := rho / d
	for v := range kt {
		ref[v] = m[v] + (ref[v]-m[v])*f
	}
	return nil
}
