package scorer

import "github.com/hopwise/hopwise/graphidx"

// Support is the presence-only model (docs/DESIGN.md, Error model) for corpora that record
// only which entities occur together. Each edge is judged by its support
// alone:
//
//	err(edge)  = v0 / (support + n0)
//	err(chain) = Σ_edges err(edge) + β·m,
//
// and a direct answer is a chain of one edge with m = 0. v0, n0 and β are
// calibration constants (WithV0, WithN0, WithBeta). The reported Dist is
// the same posterior-mean product as the Bayes model's (smoothed by α,
// WithAlpha), which for presence-only entities (K = 1) is simply [1].
// Cost: O(Σ_k K_(k−1)·K_k) per call plus one Stats lookup per edge; one
// allocation (Dist; none with Workspace.BorrowDist).
type Support struct {
	alpha, beta, v0, n0 float64
}

// NewSupport returns the presence-only model: NewSupportFrom of
// DefaultSupportConfig with opts applied (SupportConfig.Apply). Options: WithV0 (> 0, default
// DefaultV0), WithN0 (> 0, default DefaultN0), WithBeta (≥ 0, default
// DefaultSupportBeta), WithAlpha (> 0, default 1; smooths Dist only). WithSignalZ
// and WithVariance belong to the Bayes model and are rejected with
// ErrBadOption.
func NewSupport(opts ...Option) (*Support, error) {
	c, err := DefaultSupportConfig().Apply(opts...)
	if err != nil {
		return nil, err
	}
	return NewSupportFrom(c)
}

// Name returns "support".
func (m *Support) Name() string { return "support" }

// HopBias returns β.
func (m *Support) HopBias() float64 { return m.beta }

// EdgeCost returns v0/(support + n0), the model's own edge error, for the
// pair's support. O(K_a·K_b) (the support sums the table).
func (m *Support) EdgeCost(ps graphidx.PairStats) float64 {
	return m.edgeErr(ps.Support())
}

// edgeErr is v0/(support + n0). O(1).
func (m *Support) edgeErr(support uint64) float64 {
	return m.v0 / (float64(support) + m.n0)
}

// Direct returns Err = v0/(support + n0) for the pair (s, t), the
// posterior-mean Dist of P(t | s = u) and the pair support. ws may be nil.
func (m *Support) Direct(ws *Workspace, st Stats, s graphidx.EntityID, u int, t graphidx.EntityID) (Estimate, error) {
	return m.Chain(ws, st, s, u, nil, t)
}

// Chain returns Err = Σ_edges v0/(support_e + n0) + β·m, the product of
// posterior means as Dist, and the smallest edge support. ws may be nil.
func (m *Support) Chain(ws *Workspace, st Stats, s graphidx.EntityID, u int, bridges []graphidx.EntityID, t graphidx.EntityID) (Estimate, error) {
	if ws == nil {
		ws = new(Workspace)
	}
	if err := ws.setPath(st, s, u, bridges, t); err != nil {
		return Estimate{}, err
	}
	minSup, err := ws.loadEdges(st, m.alpha, nil)
	if err != nil {
		return Estimate{}, err
	}
	edges := len(bridges) + 1
	e := 0.0
	for _, sup := range ws.sup {
		e += m.edgeErr(sup)
	}
	e += m.beta * float64(len(bridges))

	kt := ws.ks[edges]
	dist := ws.newDist(kt)
	if kt == 1 { // presence-only target: the only value has probability 1
		dist[0] = 1
		return Estimate{Dist: dist, Err: e, Var: e, Support: minSup}, nil
	}
	k1 := ws.ks[1]
	if edges == 1 {
		copy(dist, ws.theta[u*k1:u*k1+k1])
		return Estimate{Dist: dist, Err: e, Var: e, Support: minSup}, nil
	}
	// Forward product x_k = x_(k−1) M_k, ping-ponging between two rows of
	// bufA and writing the last product into dist.
	kmax := 0
	for _, k := range ws.ks {
		kmax = max(kmax, k)
	}
	ws.bufA = growF(ws.bufA, 2*kmax)
	cur, nxt := ws.bufA[:kmax], ws.bufA[kmax:]
	copy(cur, ws.theta[u*k1:u*k1+k1])
	for k := 2; k <= edges; k++ {
		kp, kc := ws.ks[k-1], ws.ks[k]
		out := nxt
		if k == edges {
			out = dist
		}
		xp := dense(&ws.hA, cur, 1, kp, kp)
		mk := dense(&ws.hB, ws.theta[ws.toff[k-1]:], kp, kc, kc)
		dense(&ws.hC, out, 1, kc, kc).Mul(xp, mk)
		cur, nxt = nxt, cur
	}
	return Estimate{Dist: dist, Err: e, Var: e, Support: minSup}, nil
}
