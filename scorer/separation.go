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
	total := 0.0
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
			// neighbour of b are the farthest apart), stopping at the first.
			psPW, ok, err := pair(st, prev, w, kp, kw)
			if err != nil || !ok {
				if err != nil {
					return 0, err
				}
				continue
			}
			psWN, ok, err := pair(st, w, next, kw, kn)
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
			ws.sepB = growF(ws.sepB, kb*kw)
			ws.sepBC = growF(ws.sepBC, kb)
			fillMeans(ws.sepB, ws.sepBC, psBW, true, kb, kw, alpha)
			ws.sepW = growF(ws.sepW, kw*kn)
			ws.sepWC = growF(ws.sepWC, kw)
			fillMeans(ws.sepW, ws.sepWC, psWN, true, kw, kn, alpha)
			ws.sepG = growF(ws.sepG, kw*kt)
			matMul(ws.sepG, kt, ws.sepW, kn, rk, kt, kw, kn, kt)
			wk := witness{mbw: ws.sepB, cbw: ws.sepBC, g: ws.sepG, kw: kw}
			worst = max(worst, ws.witnessBias(&wk, psPW, y, z, mk, ck, kt, alpha))
		}
		total += worst
	}
	if total == 0 {
		return 0, nil
	}
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
	ws.sepD = growF(ws.sepD, kp*kw)
	ws.sepC = growF(ws.sepC, kp)
	fillMeans(ws.sepD, ws.sepC, ps, true, kp, kw, alpha)
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
