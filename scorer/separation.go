package scorer

import "github.com/hopwise/hopwise/graphidx"

// RankedNeighborer is an optional interface of a Stats: the entity's
// neighbours by descending pair support (a prefix is enough).
// *graphidx.Index satisfies it. With it the Bayes model's separation check
// also tests a bridge against witnesses (see Bayes, "Separation check").
type RankedNeighborer interface {
	RankedNeighbors(id graphidx.EntityID) []graphidx.EntityID
}

// SeparationWitnesses is the most ranked neighbours of a bridge read as
// witnesses of its separation check: the support-ranked prefix holds the
// bridge's strongest associations, where a common effect shows first, and
// the bound keeps the check at O(m·W) pair look-ups per chain.
const SeparationWitnesses = 2

// PrevWitnesses is the most neighbours of a bridge's predecessor on the
// chain, in support order, tested as witnesses on its side
// (prevWitnessBias): those that move the predecessor enough
// (prevWitnessMoves); one never observed with the bridge's successor is
// looked up and skipped, so it counts too.
const PrevWitnesses = 2

// PrevWitnessScale is the largest factor by which prevWitnessBias carries
// a witness's bias over to the query: a witness must move prev by at least
// half the query's own deviation (a choice, not fitted). For a binary
// witness w the bias does not depend on the scale of its deviation, and
// the test asks it of the value w = r that π leans to (prevWitnessMoves).
const PrevWitnessScale = 4.0

// separationBias returns S = Σ_k S_k of the Bayes model's separation check
// (see Bayes, "Separation check") for the path set by setPath, whose edges
// are loaded (loadEdges) and whose forward vectors x_1..x_(m−1) are in ws.x
// (the forward pass of Chain).
//
// For bridge b_k (k = 1..m) with chain neighbours prev = b_(k−1) and next =
// b_(k+1), a witness is an entity w whose tables with prev and with b_k are
// in the index and for which the route w → next is known: w = next itself
// when prev and next were observed together (the route is the identity);
// otherwise each of the first SeparationWitnesses ranked neighbours of b_k
// off the path with tables (prev, w) and (w, next). With y = x_(k−1) (e_u for
// k = 1), z = y M_k, G = M(w, next) R_(k+1) (R_(k+1) = I for w = next and
// k = m) and H = M(b_k, w) G,
//
//	Δ_w = z H − (y D(prev, w)) G,
//	V_w = Σ_v [ Σ_r y_r² c_k[r] q(M_k[r,:], H[:,v])
//	          + Σ_j z_j² c_bw[j] q(M(b_k, w)[j,:], G[:,v])
//	          + Σ_r y_r² c_D[r] q(D(prev, w)[r,:], G[:,v]) ],
//
// where q(θ, g) = Σ_j θ_j g_j² − (Σ_j θ_j g_j)² is the Dirichlet quadratic
// form of the delta method and c the row factors 1/(n_r + Kα + 1). If b_k
// separates prev from w, E[Δ_w] = 0 and E‖Δ_w‖² ≈ V_w; S_k = max over the
// witnesses of max(0, ‖Δ_w‖² − V_w), 0 without witnesses. Cost O(m·W·K³)
// time and at most m·(1 + 3·SeparationWitnesses) pair look-ups (one per
// bridge when its neighbours were observed together), no allocation once
// the buffers have grown.
func (ws *Workspace) separationBias(st Stats, u, m int, alpha float64) (float64, error) {
	ws.sepWit = ws.sepWit[:0]
	ws.sepPrevFrac = 0
	kt := ws.ks[m+1]
	// R_1..R_(m+1), R_j of K_j × K_t, concatenated at roff[j−1].
	ws.roff = growI(ws.roff, m+2)
	n := 0
	for j := 1; j <= m+1; j++ {
		ws.roff[j-1] = n
		n += ws.ks[j] * kt
	}
	ws.roff[m+1] = n
	ws.rr = growF(ws.rr, n)
	last := ws.rr[ws.roff[m]:ws.roff[m+1]]
	clear(last)
	for v := 0; v < kt; v++ {
		last[v*kt+v] = 1
	}
	for j := m; j >= 1; j-- {
		// R_j = M_(j+1) R_(j+1): M_(j+1) is K_j × K_(j+1).
		kj, kn := ws.ks[j], ws.ks[j+1]
		matMul(ws.rr[ws.roff[j-1]:], kt, ws.theta[ws.toff[j]:], kn, ws.rr[ws.roff[j]:], kt, kj, kn, kt)
	}
	rn, _ := st.(RankedNeighborer)
	const km = graphidx.MaxValues
	ws.sepY = growF(ws.sepY, 3*km)
	total, prevTotal := 0.0, 0.0
	for k := 1; k <= m; k++ {
		kp, kb, kn := ws.ks[k-1], ws.ks[k], ws.ks[k+1]
		prev, b, next := ws.path[k-1], ws.path[k], ws.path[k+1]
		y, z := ws.sepY[:kp], ws.sepY[km:km+kb]
		if k == 1 {
			clear(y)
			y[u] = 1
		} else {
			copy(y, ws.x[ws.xoff[k-2]:ws.xoff[k-1]])
		}
		mk := ws.theta[ws.toff[k-1]:ws.toff[k]]
		ck := ws.cinv[ws.coff[k-1]:ws.coff[k]]
		matMul(z, kb, y, kp, mk, kb, 1, kp, kb)
		rk := ws.rr[ws.roff[k]:ws.roff[k+1]] // R_(k+1), K_(k+1) × K_t
		worst := 0.0
		// Witness next: the chain's own edge (b_k, next) and route I.
		ps, ok, err := pair(st, prev, next, kp, kn)
		if err != nil {
			return 0, err
		}
		if ok {
			wk := witness{
				mbw: ws.theta[ws.toff[k]:ws.toff[k+1]], cbw: ws.cinv[ws.coff[k]:ws.coff[k+1]],
				g: rk, kw: kn,
			}
			worst = max(worst, ws.witnessBias(&wk, ps, y, z, mk, ck, kt, alpha))
			ws.sepWit = append(ws.sepWit, next)
		}
		if rn == nil || ok {
			// With prev and next observed together the chain's own hop is
			// tested directly; other witnesses are read only when it
			// cannot be.
			total += worst
			continue
		}
		seen := 0
		for _, w := range rn.RankedNeighbors(b) {
			if seen == SeparationWitnesses {
				break
			}
			if ws.onPath(w) {
				continue
			}
			seen++
			kw, err := numValues(st, w)
			if err != nil {
				return 0, err
			}
			// Look-ups in order of how likely they are to fail (prev and a
			// neighbour of b are the farthest apart), stopping at the first;
			// the witness needs all three, so the order changes only which
			// are read. For the last bridge of a longer chain next is the
			// target, and (w, next) comes first: it fails about as often,
			// and a pair of a query's end is the one the statistics most
			// likely answer without a look-up (the router keeps the ends'
			// neighbour lists), where prev is a bridge.
			var psPW, psWN graphidx.PairStats
			var ok bool
			if k == m && m > 1 {
				if psWN, ok, err = pair(st, w, next, kw, kn); err == nil && ok {
					psPW, ok, err = pair(st, prev, w, kp, kw)
				}
			} else if psPW, ok, err = pair(st, prev, w, kp, kw); err == nil && ok {
				psWN, ok, err = pair(st, w, next, kw, kn)
			}
			if err != nil || !ok {
				if err != nil {
					return 0, err
				}
				continue
			}
			psBW, ok, err := pair(st, b, w, kb, kw)
			if err != nil || !ok {
				if err != nil {
					return 0, err
				}
				continue
			}
			// M(b, w) with row factors, and G = M(w, next) R_(k+1).
			ws.sepB, ws.sepBC = growMeans(ws.sepB, ws.sepBC, psBW, kb, kw, alpha)
			ws.sepW, ws.sepWC = growMeans(ws.sepW, ws.sepWC, psWN, kw, kn, alpha)
			ws.sepG = growF(ws.sepG, kw*kt)
			matMul(ws.sepG, kt, ws.sepW, kn, rk, kt, kw, kn, kt)
			wk := witness{mbw: ws.sepB, cbw: ws.sepBC, g: ws.sepG, kw: kw}
			worst = max(worst, ws.witnessBias(&wk, psPW, y, z, mk, ck, kt, alpha))
			ws.sepWit = append(ws.sepWit, w)
		}
		// Witnesses on prev's side: neighbours w of prev observed with next,
		// for one-bridge chains only (prev = s, next = t, never observed
		// together: the influence bound has just read every table (s, w))
		// and only when s has at most InfluenceFirst neighbours, like the
		// influence bound. Reading them for the first bridge of every chain
		// read five times as many tables (s, w) on the router's benchmark,
		// mostly of pairs observed together that nothing else reads.
		nl, ok := st.(NeighborLister)
		if m > 1 || !ok || len(nl.Neighbors(prev)) > InfluenceFirst {
			total += worst
			continue
		}
		seen = 0
		prevWorst := 0.0
		for _, w := range rn.RankedNeighbors(prev) {
			if seen == PrevWitnesses {
				break
			}
			if ws.onPath(w) {
				continue
			}
			kw, err := numValues(st, w)
			if err != nil {
				return 0, err
			}
			// The table (prev, w) first (the decision has read it): only a
			// w that moves prev enough is a witness (prevWitnessScale), and
			// only such a w costs the look-up of (w, next).
			psPW, ok, err := pair(st, prev, w, kp, kw)
			if err != nil {
				return 0, err
			}
			if !ok {
				continue
			}
			num, den, moves := ws.prevWitnessMoves(psPW, y, alpha)
			if !moves {
				continue
			}
			seen++
			psWN, ok, err := pair(st, w, next, kw, kn)
			if err != nil {
				return 0, err
			}
			if !ok {
				continue
			}
			psWB, okWB, err := pair(st, w, b, kw, kb)
			if err != nil {
				return 0, err
			}
			pb := ws.prevWitnessBias(psPW, psWN, psWB, okWB, y, mk, ck, k, kt, alpha, num, den)
			if pb > 0 && !okWB {
				refuted, err := ws.prevWitnessRefuted(st, rn, w, kw, k, alpha)
				if err != nil {
					return 0, err
				}
				if refuted {
					pb = 0
				}
			}
			worst = max(worst, pb)
			prevWorst = max(prevWorst, pb)
			ws.sepWit = append(ws.sepWit, w)
		}
		total += worst
		prevTotal += prevWorst
	}
	if total == 0 {
		return 0, nil
	}
	ws.sepPrevFrac = min(1, prevTotal/total)
	// The check measures a dependence the chain invents through a bridge
	// that does not separate; the bias that adds is at most the chain's
	// own distance from the target's marginal, ‖p̂ − m_t‖² (equal when the
	// endpoints are independent, as through a common effect).
	if d2, ok := ws.marginalDistance(st, u, m, alpha); ok {
		total = min(total, d2)
	}
	return total, nil
}

// marginalDistance returns ‖p̂ − m_t‖² for the chain loaded by setPath and
// loadEdges with its suffix products R_j in ws.rr (separationBias): p̂ = row
// u of M_1 R_1 and m_t the target's smoothed marginal. ok is false without
// marginals. O(K_1·K_t).
func (ws *Workspace) marginalDistance(st Stats, u, m int, alpha float64) (float64, bool) {
	mg, ok := st.(Marginals)
	if !ok {
		return 0, false
	}
	kt := ws.ks[m+1]
	c := mg.Marginal(ws.path[m+1])
	if len(c) != kt {
		return 0, false
	}
	tot := float64(kt) * alpha
	for _, x := range c {
		tot += float64(x)
	}
	k1 := ws.ks[1]
	r1 := ws.rr[ws.roff[0]:ws.roff[1]]
	row := ws.theta[u*k1 : u*k1+k1]
	d2 := 0.0
	for v := 0; v < kt; v++ {
		p := 0.0
		for j, th := range row {
			p += th * r1[j*kt+v]
		}
		d := p - (float64(c[v])+alpha)/tot
		d2 += d * d
	}
	return d2, true
}

// witness is one witness w of a bridge's separation check: M(b, w) (K_b ×
// K_w) with its row factors, and G, the route from w to the target (K_w ×
// K_t).
type witness struct {
	mbw, cbw, g []float64
	kw          int
}

// witnessBias returns max(0, ‖Δ_w‖² − V_w) for the witness wk, the pair
// table ps of (prev, w), y over prev's values, z = y M_k and M_k (rows mk,
// row factors ck). See separationBias. O(K³).
func (ws *Workspace) witnessBias(wk *witness, ps graphidx.PairStats, y, z, mk, ck []float64, kt int, alpha float64) float64 {
	kp, kb, kw := len(y), len(z), wk.kw
	ws.sepD, ws.sepC = growMeans(ws.sepD, ws.sepC, ps, kp, kw, alpha)
	// H = M(b, w) G; a = z H; c = (y D) G.
	ws.sepH = growF(ws.sepH, kb*kt)
	matMul(ws.sepH, kt, wk.mbw, kw, wk.g, kt, kb, kw, kt)
	ws.sepA = growF(ws.sepA, 2*kt)
	a, c := ws.sepA[:kt], ws.sepA[kt:2*kt]
	matMul(a, kt, z, kb, ws.sepH, kt, 1, kb, kt)
	yd := ws.sepY[2*graphidx.MaxValues : 2*graphidx.MaxValues+kw]
	matMul(yd, kw, y, kp, ws.sepD, kw, 1, kp, kw)
	matMul(c, kt, yd, kw, wk.g, kt, 1, kw, kt)
	d2 := 0.0
	for v := range a {
		d := a[v] - c[v]
		d2 += d * d
	}
	noise := 0.0
	for r, yr := range y {
		if yr == 0 {
			continue
		}
		w := yr * yr
		noise += w * ck[r] * quadForm(mk[r*kb:r*kb+kb], ws.sepH, kt)
		noise += w * ws.sepC[r] * quadForm(ws.sepD[r*kw:r*kw+kw], wk.g, kt)
	}
	for j, zj := range z {
		if zj == 0 {
			continue
		}
		noise += zj * zj * wk.cbw[j] * quadForm(wk.mbw[j*kw:j*kw+kw], wk.g, kt)
	}
	return max(0, d2-noise)
}

// prevWitnessBias returns the separation bias that a witness w of bridge
// b_k taken on prev's side shows at the query: w is a neighbour of prev =
// b_(k−1) observed with next = b_(k+1) (prev and next never were). If b_k
// separates prev from next and prev separates w from next, P(next | w) =
// M(w, prev) M_k M_(k+1): moving w by d = π − m_w, π = y M(prev, w) its
// distribution at the query and m_w its marginal, moves the target by
//
//	a = d M(w, prev) M_k R_k   (the chain's claim, R_k = M_(k+1) R_(k+1)),
//	c = d D(w, next) R_(k+1)   (the table's),
//
// with E[a − c] = 0 (each side uses the marginal of w in its own table, so
// the two tables' levels need not agree). V_w sums the delta-method terms of
// the rows of D, M(w, prev) (the table (prev, w) read by column), M_k and
// M_(k+1), each row weighted by its squared weight. Three rules keep it to
// what it can show:
//
//   - One-sided: only a dependence the chain invents counts (‖a‖ > ‖c‖).
//     When the table shows more than the chain claims, w reaches next by a
//     route of its own, which says nothing about b_k.
//   - prev must separate w from b_k; where (w, b_k) was observed that is
//     tested, d M(w, prev) M_k against d M(w, b_k), at the χ² level of the
//     collider tests (ColliderLevel), and a w that fails (prev a common
//     effect of w and b_k) is no witness.
//   - The bias at the query: where it is linear in prev's deviation from
//     its marginal (exact for a binary prev), it is the witness's times
//     ‖y − m_p‖²/‖y2 − m_p‖², y2 = π M(w, prev) the distribution of prev that
//     w implies. A witness that moves prev by less than 1/√PrevWitnessScale
//     of the query's deviation is not read (its noise would be blown up).
//
// In ASIA (Lauritzen & Spiegelhalter 1988) this is how xray, a child of
// either, shows that either → dysp → bronc crosses the common effect dysp:
// the chain claims that xray = yes raises P(bronc) to about 0.60; the table
// says 0.46, about the marginal. psPW is the pair (prev, w), psWN the pair
// (w, next), psWB the pair (w, b_k) when okWB; y over prev's values; M_k
// (rows mk, row factors ck); num and den are what prevWitnessMoves found
// for psPW and y, whose products prevWitnessDev left in the workspace
// (nothing may write the workspace in between). O(K³), no look-up.
func (ws *Workspace) prevWitnessBias(psPW, psWN, psWB graphidx.PairStats, okWB bool, y, mk, ck []float64, k, kt int, alpha, num, den float64) float64 {
	kp, kb, kw, kn := len(y), ws.ks[k], psPW.KB, psWN.KB
	rk := ws.rr[ws.roff[k-1]:ws.roff[k]]  // R_k, K_k × K_t
	rk1 := ws.rr[ws.roff[k]:ws.roff[k+1]] // R_(k+1), K_(k+1) × K_t
	mk1 := ws.theta[ws.toff[k]:ws.toff[k+1]]
	ck1 := ws.cinv[ws.coff[k]:ws.coff[k+1]]
	const km = graphidx.MaxValues
	if need := 8*km + kw*kt; cap(ws.sepD) < need {
		// Growing drops what prevWitnessDev left in ws.sepD: again.
		ws.sepD = growF(ws.sepD, need)
		num, den, _ = ws.prevWitnessDev(psPW, y, alpha)
	}
	ws.sepD = ws.sepD[:8*km+kw*kt]
	z2, e := ws.sepD[5*km:5*km+kb], ws.sepD[6*km:6*km+kb]
	f := ws.sepD[8*km : 8*km+kw*kt]
	pi, d, dn := ws.sepD[:kw], ws.sepD[km:km+kw], ws.sepD[2*km:2*km+kw]
	y2 := ws.sepD[3*km : 3*km+kp]
	// H = M_k R_k (K_prev × K_t); F = Q H; a = d F.
	ws.sepH = growF(ws.sepH, kp*kt)
	matMul(ws.sepH, kt, mk, kb, rk, kt, kp, kb, kt)
	matMul(f, kt, ws.sepQ, kp, ws.sepH, kt, kw, kp, kt)
	ws.sepA = growF(ws.sepA, 2*kt)
	a, c := ws.sepA[:kt], ws.sepA[kt:2*kt]
	matMul(a, kt, d, kw, f, kt, 1, kw, kt)
	// D = M(w, next) with its own marginal of w; G = D R_(k+1); c = dn G.
	ws.sepW = growF(ws.sepW, kw*max(kn, kb))
	ws.sepWC = growF(ws.sepWC, kw)
	fillMeans(ws.sepW, ws.sepWC, psWN, true, kw, kn, alpha)
	if !shiftFromRows(dn, pi, psWN) {
		return 0
	}
	ws.sepG = growF(ws.sepG, kw*kt)
	matMul(ws.sepG, kt, ws.sepW, kn, rk1, kt, kw, kn, kt)
	matMul(c, kt, dn, kw, ws.sepG, kt, 1, kw, kt)
	d2, na, nc := 0.0, 0.0, 0.0
	for v := range a {
		x := a[v] - c[v]
		d2 += x * x
		na += a[v] * a[v]
		nc += c[v] * c[v]
	}
	if na <= nc {
		return 0 // the table shows at least the dependence the chain claims
	}
	noise := 0.0
	for j := 0; j < kw; j++ {
		noise += dn[j] * dn[j] * ws.sepWC[j] * quadForm(ws.sepW[j*kn:j*kn+kn], rk1, kt)
		noise += d[j] * d[j] * ws.sepQC[j] * quadForm(ws.sepQ[j*kp:j*kp+kp], ws.sepH, kt)
	}
	matMul(z2, kb, y2, kp, mk, kb, 1, kp, kb)
	for r, yr := range y2 {
		noise += yr * yr * ck[r] * quadForm(mk[r*kb:r*kb+kb], rk, kt)
	}
	for j, zj := range z2 {
		noise += zj * zj * ck1[j] * quadForm(mk1[j*kn:j*kn+kn], rk1, kt)
	}
	if d2 <= noise {
		return 0
	}
	if okWB && kb >= 2 {
		// Does prev separate w from b_k? z2 = d Q M_k is the chain's claim
		// at b_k, e = d' M(w, b_k) the table's (d' with that table's m_w).
		fillMeans(ws.sepW, ws.sepWC, psWB, true, kw, kb, alpha)
		if !shiftFromRows(dn, pi, psWB) {
			return 0
		}
		matMul(e, kb, dn, kw, ws.sepW, kb, 1, kw, kb)
		ea, va := 0.0, 0.0
		for v := range e {
			ea += (z2[v] - e[v]) * (z2[v] - e[v])
		}
		for j := 0; j < kw; j++ {
			va += dn[j] * dn[j] * ws.sepWC[j] * rowVar(ws.sepW[j*kb:j*kb+kb])
			va += d[j] * d[j] * ws.sepQC[j] * quadForm(ws.sepQ[j*kp:j*kp+kp], mk, kb)
		}
		for r, yr := range y2 {
			va += yr * yr * ck[r] * rowVar(mk[r*kb:r*kb+kb])
		}
		if ea > va*chi2Crit[kb-1]/float64(kb-1) {
			return 0
		}
	}
	return num / den * (d2 - noise)
}

// prevWitnessMoves reports whether w, through the table psPW of (prev, w),
// moves prev by enough to witness a bridge after prev: the deviation of prev
// it implies, y2 − m_p, has ‖y − m_p‖² ≤ PrevWitnessScale·‖y2 − m_p‖² (see
// prevWitnessBias). For a binary w, y2 − m_p is taken at w = r, the value π
// leans to (d rescaled to e_r − m_w): the bias prevWitnessBias returns,
// num/den·(d2 − noise), is the same for any scale of d, so only what w = r
// itself does to prev can tell a witness from noise. In ASIA this admits
// tub for either = yes (tub = yes implies either = yes, though
// P(tub | either = yes) is 0.16), which shows that either → dysp → bronc
// crosses the common effect dysp; it also admits a second cause of a
// collider prev (bronc for dysp → either → tub), which the test of prev
// separating w from b_k catches when (w, b_k) was observed, and
// prevWitnessRefuted otherwise where a neighbour of b_k beyond it can tell
// (docs/QUALITY.md §4f). O(K²), no look-up.
func (ws *Workspace) prevWitnessMoves(psPW graphidx.PairStats, y []float64, alpha float64) (num, den float64, moves bool) {
	num, den, ok := ws.prevWitnessDev(psPW, y, alpha)
	if !ok {
		return num, den, false
	}
	gate := den
	if kw := psPW.KB; kw == 2 {
		// A binary w: d = π − m_w is d_r·(e_r − m_w)/(1 − m_w[r]) for the
		// value r it leans to, and the bias prevWitnessBias returns does not
		// depend on d's scale (num/den grows as d2 and the noise shrink),
		// so the gate asks whether w = r itself moves prev that far.
		const km = graphidx.MaxValues
		d, dn := ws.sepD[km:km+kw], ws.sepD[2*km:2*km+kw]
		r := 0
		if d[1] > d[0] {
			r = 1
		}
		tot := dn[0] + dn[1]
		if d[r] <= 0 || !(tot > 0) {
			return num, den, false
		}
		sc := (1 - dn[r]/tot) / d[r]
		gate = den * sc * sc
	}
	return num, den, num <= PrevWitnessScale*gate
}

// prevWitnessDev computes, from the table psPW of (prev, w): P = M(prev,
// w) into ws.sepB, Q = M(w, prev) (the same counts read by column) into
// ws.sepQ with its row factors, and into ws.sepD π = y P, d = π − m_w, y2 −
// m_p = d Q and m_p (m_w and m_p the marginals of w and prev in that table);
// it returns num = ‖y − m_p‖² and den = ‖y2 − m_p‖². ok is false for an
// empty table. O(K²).
func (ws *Workspace) prevWitnessDev(psPW graphidx.PairStats, y []float64, alpha float64) (num, den float64, ok bool) {
	kp, kw := psPW.KA, psPW.KB
	const km = graphidx.MaxValues
	ws.sepD = growF(ws.sepD, 5*km)
	pi, d, dn := ws.sepD[:kw], ws.sepD[km:km+kw], ws.sepD[2*km:2*km+kw]
	y2, mp := ws.sepD[3*km:3*km+kp], ws.sepD[4*km:4*km+kp]
	ws.sepB, ws.sepBC = growMeans(ws.sepB, ws.sepBC, psPW, kp, kw, alpha)
	ws.sepQ = growF(ws.sepQ, kw*kp)
	ws.sepQC = growF(ws.sepQC, kw)
	kpA := float64(kp) * alpha
	tot := 0.0
	clear(mp)
	for j := 0; j < kw; j++ {
		n := 0.0
		for r := 0; r < kp; r++ {
			c := float64(psPW.Count(r, j))
			ws.sepQ[j*kp+r] = c + alpha
			mp[r] += c
			n += c
		}
		dn[j] = n
		tot += n
		den := n + kpA
		for r := 0; r < kp; r++ {
			ws.sepQ[j*kp+r] /= den
		}
		ws.sepQC[j] = 1 / (den + 1)
	}
	if !(tot > 0) {
		return 0, 0, false
	}
	for r := range mp {
		mp[r] /= tot
	}
	matMul(pi, kw, y, kp, ws.sepB, kw, 1, kp, kw)
	for j := range d {
		d[j] = pi[j] - dn[j]/tot
	}
	matMul(y2, kp, d, kw, ws.sepQ, kp, 1, kw, kp)
	for r := 0; r < kp; r++ {
		num += (y[r] - mp[r]) * (y[r] - mp[r])
		den += y2[r] * y2[r]
	}
	return num, den, true
}

// rowVar returns 1 − Σ_v θ_v², the delta-method factor of a Dirichlet row
// seen through the identity (quadForm with R = I). O(K).
func rowVar(theta []float64) float64 {
	sq := 0.0
	for _, th := range theta {
		sq += th * th
	}
	return max(0, 1-sq)
}

// onPath reports whether id is on the path set by setPath. O(m).
func (ws *Workspace) onPath(id graphidx.EntityID) bool {
	for _, p := range ws.path {
		if p == id {
			return true
		}
	}
	return false
}

// quadForm returns Σ_v [Σ_j θ_j R[j,v]² − (Σ_j θ_j R[j,v])²] for the row θ
// (len K) and the K × kt row-major matrix R: the sum over target values of
// the delta-method variance factor of one Dirichlet row (times its 1/c).
// O(K·kt).
func quadForm(theta, r []float64, kt int) float64 {
	s := 0.0
	for v := 0; v < kt; v++ {
		m1, m2 := 0.0, 0.0
		for j, th := range theta {
			x := r[j*kt+v]
			m1 += th * x
			m2 += th * x * x
		}
		s += m2 - m1*m1
	}
	return max(0, s)
}

// shiftFromRows writes into dn (length K_w) the shift π − m_w of w's
// distribution π from w's marginal m_w as the table ps (rows are w's
// values) counts it, and reports false when ps counts nothing. O(K_w).
func shiftFromRows(dn, pi []float64, ps graphidx.PairStats) bool {
	tot := 0.0
	for j := range dn {
		dn[j] = float64(ps.RowSum(j))
		tot += dn[j]
	}
	if !(tot > 0) {
		return false
	}
	for j := range dn {
		dn[j] = pi[j] - dn[j]/tot
	}
	return true
}

// prevWitnessRefuted reports whether a prev-side witness w of bridge b_k
// whose table with b_k is missing (so prevWitnessBias could not test that
// prev separates w from b_k) is better explained by prev being a common
// effect of w and b_k than by b_k failing to separate prev from next.
// prevWitnessBias must have just returned a positive bias for w; its
// products (π, d, y2 − m_p = d Q and z2 = (y2 − m_p) M_k, the shift of b_k
// the chain claims for w) are read from the workspace.
//
// The witness's deficit at next has two explanations that the tables
// (prev, w), (w, next), (prev, b_k) and (b_k, next) cannot tell apart:
// (1) b_k does not separate prev from next (the chain is wrong), or (2) w
// does not reach b_k through prev, as when prev is a common effect of w and
// b_k (the chain may be right). They differ beyond b_k: for a neighbour x
// of b_k that prev was never observed with (so prev reaches it, if at all,
// through b_k), (1) keeps the route w → prev → b_k → x and predicts the
// shift a = z2 M(b_k, x) in the table (w, x); (2) predicts none. With c =
// d' M(w, x) the table's shift (d' = π − m_w with that table's marginal of
// w), the nearer prediction wins, as between two point hypotheses of equal
// prior and equal noise: w is refuted when ‖c‖² < ‖a − c‖². An x whose
// predicted shift is within the noise, ‖a‖² ≤ V (V the delta-method
// variance of a − c: the rows of M(w, x), M(b_k, x), M_k and Q), cannot
// tell and is skipped; the first x that can decides. Without one the
// witness stands.
//
// In ASIA (Lauritzen & Spiegelhalter 1988) bronc is a witness of
// dysp → either → tub (dysp a common effect of either and bronc; the table
// (bronc, either) held out): the route bronc → dysp → either → xray claims
// a shift of xray the table (bronc, xray) does not show, so bronc is
// refuted on the corpora where that claim is above the noise. tub, the
// witness of either → dysp → bronc, has no such x (dysp's neighbours other
// than either and bronc were observed with either) and stands.
// The neighbours read are the first 2·SeparationWitnesses ranked ones off
// the path, of which at most SeparationWitnesses are tested: O(W·K³), at
// most 4·SeparationWitnesses look-ups, only for a witness that charges.
func (ws *Workspace) prevWitnessRefuted(st Stats, rn RankedNeighborer, w graphidx.EntityID, kw, k int, alpha float64) (bool, error) {
	if rn == nil {
		return false, nil
	}
	prev, b := ws.path[k-1], ws.path[k]
	kp, kb := ws.ks[k-1], ws.ks[k]
	const km = graphidx.MaxValues
	pi, d := ws.sepD[:kw], ws.sepD[km:km+kw]
	y2, z2 := ws.sepD[3*km:3*km+kp], ws.sepD[5*km:5*km+kb]
	dx := ws.sepD[7*km : 7*km+kw]
	mk := ws.theta[ws.toff[k-1]:ws.toff[k]]
	ck := ws.cinv[ws.coff[k-1]:ws.coff[k]]
	seen, tested := 0, 0
	for _, x := range rn.RankedNeighbors(b) {
		if seen == 2*SeparationWitnesses || tested == SeparationWitnesses {
			break
		}
		if x == w || ws.onPath(x) {
			continue
		}
		seen++
		kx, err := numValues(st, x)
		if err != nil {
			return false, err
		}
		// x must be reached from prev only through b: (prev, x) never
		// observed together.
		_, ok, err := pair(st, prev, x, kp, kx)
		if err != nil {
			return false, err
		}
		if ok {
			continue
		}
		tested++
		psWX, ok, err := pair(st, w, x, kw, kx)
		if err != nil {
			return false, err
		}
		if !ok {
			continue
		}
		psBX, ok, err := pair(st, b, x, kb, kx)
		if err != nil {
			return false, err
		}
		if !ok {
			continue
		}
		ws.sepB, ws.sepBC = growMeans(ws.sepB, ws.sepBC, psBX, kb, kx, alpha)
		ws.sepW, ws.sepWC = growMeans(ws.sepW, ws.sepWC, psWX, kw, kx, alpha)
		if !shiftFromRows(dx, pi, psWX) {
			continue
		}
		// The chain's claim at x, z2 M(b, x), and the table's, dx M(w, x).
		ws.sepG = growF(ws.sepG, kp*kx)
		matMul(ws.sepG, kx, mk, kb, ws.sepB, kx, kp, kb, kx)
		ws.sepA = growF(ws.sepA, 2*km)
		a, c := ws.sepA[:kx], ws.sepA[km:km+kx]
		matMul(a, kx, z2, kb, ws.sepB, kx, 1, kb, kx)
		matMul(c, kx, dx, kw, ws.sepW, kx, 1, kw, kx)
		d2, na, nc := 0.0, 0.0, 0.0
		for v := range a {
			d2 += (a[v] - c[v]) * (a[v] - c[v])
			na += a[v] * a[v]
			nc += c[v] * c[v]
		}
		noise := 0.0
		for j := 0; j < kw; j++ {
			noise += dx[j] * dx[j] * ws.sepWC[j] * rowVar(ws.sepW[j*kx:j*kx+kx])
			noise += d[j] * d[j] * ws.sepQC[j] * quadForm(ws.sepQ[j*kp:j*kp+kp], ws.sepG, kx)
		}
		for r, yr := range y2 {
			noise += yr * yr * ck[r] * quadForm(mk[r*kb:r*kb+kb], ws.sepB, kx)
		}
		for j, zj := range z2 {
			noise += zj * zj * ws.sepBC[j] * rowVar(ws.sepB[j*kx:j*kx+kx])
		}
		if na <= noise {
			continue // x cannot tell the two apart
		}
		return nc < d2, nil
	}
	return false, nil
}
