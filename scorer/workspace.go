package scorer

import (
	"fmt"

	"github.com/hopwise/hopwise/graphidx"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"
)

// Workspace holds the scratch buffers of Direct and Chain calls so that
// repeated calls do not allocate beyond the returned Dist (and, after
// BorrowDist(true), not at all). Buffers grow to the largest chain seen and
// are then reused. A Workspace must not be used by two goroutines at once;
// give each goroutine its own (or keep them in a sync.Pool). The zero value
// is ready to use, with Dist freshly allocated per call.
type Workspace struct {
	path []graphidx.EntityID // s, b1..bm, t
	ks   []int               // K of each path node

	theta []float64 // posterior-mean matrices M_1..M_(m+1), row-major, concatenated
	toff  []int     // toff[k-1] = offset of M_k in theta
	cinv  []float64 // 1/(n_r + K_k α + 1) for each row r of each M_k, concatenated
	coff  []int     // coff[k-1] = offset of M_k's rows in cinv
	sup   []uint64  // sup[k-1] = support of edge k (the pair count behind M_k)
	lb    []float64 // lb[k-1] = signal lower bound of edge k (Bayes.signalBound), when asked

	x    []float64 // forward row vectors x_1..x_m, concatenated
	xoff []int     // xoff[k-1] = offset of x_k

	bufA, bufB []float64 // backward products [R | ·] (K_(k−1) × 2K_t)
	vr         []float64 // Σ_v accumulators, length K_t
	mt, w      []float64 // ExactMoments: M̄ᵀ and row weights

	// separation check (separationBias)
	rr                     []float64 // suffix products R_1..R_(m+1), concatenated
	roff                   []int     // roff[j-1] = offset of R_j in rr
	sepD, sepC, sepY, sepA []float64 // D(prev, w), its row factors, y|z|yD, Δ terms
	sepB, sepBC, sepW      []float64 // M(b, w), its row factors, M(w, next)
	sepWC, sepG, sepH      []float64 // M(w, next)'s row factors, G, H
	sepQ, sepQC            []float64 // M(w, prev) of a witness of prev, its row factors

	// deferSep defers the separation bias of Bayes.Chain (DeferSeparation);
	// sepPending marks a deferred term for the last chain (value sepU,
	// sepM bridges) that PendingBias computes from the loaded path.
	deferSep, sepPending bool
	sepU, sepM           int
	// sepEx is the bound excess the last Chain call charged (sepOrExcess).
	sepEx float64
	// sepPrevFrac is the share of the last separation check's S that its
	// prev-side witnesses account for (separationBias).
	sepPrevFrac float64
	// sepWit lists the witnesses whose tables the last separation check
	// read in full (SeparationWitnesses); reset by every Chain call.
	sepWit []graphidx.EntityID

	// influence bound of the last query (Bayes.unseenRatio): the ratio
	// D/E0_prior for observed value inflU of inflS and target inflT over
	// the Stats inflSt, valid when inflOK.
	inflOK       bool
	inflS, inflT graphidx.EntityID
	inflU        int
	inflSt       Stats
	inflRatio    float64
	// inflBnd is that query's bound on ‖P(t | s = u) − P(t)‖² (+Inf when
	// none; Bayes.boundExcess).
	inflBnd float64
	// inflTerms are the route terms of B_t of that query (routeTerms).
	inflTerms routeTerms

	// borrow makes newDist hand out out instead of a fresh slice
	// (BorrowDist); out is never used as scratch by any computation.
	borrow bool
	out    []float64

	// par is the scratch of Bayes.Parallel (allocated on first use).
	par *parWork

	// gonum headers over the buffers above (set with SetRawMatrix, so that
	// no mat.Dense is allocated per call).
	hA, hB, hC mat.Dense
}

// NewWorkspace returns an empty workspace. It is equivalent to new(Workspace).
func NewWorkspace() *Workspace { return new(Workspace) }

// BorrowDist sets who owns the Dist of the estimates that the built-in
// models (Bayes, Support) return for calls made with this workspace.
//
// Off (the default, and the zero value): each Dist is freshly allocated and
// belongs to the caller, as the Model interface documents.
//
// On: each Dist is a view of one buffer owned by the workspace, valid only
// until the next Direct or Chain call with this workspace (which overwrites
// it), so a caller that keeps an estimate must copy it first. A call then
// allocates nothing once the workspace's buffers have grown to the largest
// path seen. The values are bit for bit the same either way. Other Model
// implementations may ignore the setting and keep allocating, which is
// always safe. O(1).
func (ws *Workspace) BorrowDist(on bool) { ws.borrow = on }

// DeferSeparation sets whether the Bayes model's Chain calls made with this
// workspace leave out the separation bias (see Bayes, "Separation check")
// and only record it as pending, for Bayes.PendingBias to add when the
// caller needs it. The term is ≥ 0, so a caller that compares a chain's
// error against a best-so-far can compute it only for chains that would
// otherwise win, and decide exactly as if it were always included (the
// router does). Off by default. O(1).
func (ws *Workspace) DeferSeparation(on bool) { ws.deferSep = on }

// BorrowsDist reports whether BorrowDist(true) is in effect.
func (ws *Workspace) BorrowsDist() bool { return ws != nil && ws.borrow }

// newDist returns the Dist of n values for an estimate: a fresh slice, or
// with BorrowDist the workspace's output buffer, capped at n so that an
// append by the caller cannot write past it. ws may be nil. The contents
// are unspecified; every caller writes all n values.
func (ws *Workspace) newDist(n int) []float64 {
	if ws == nil || !ws.borrow {
		return make([]float64, n)
	}
	ws.out = growF(ws.out, n)
	return ws.out[:n:n]
}

func growF(b []float64, n int) []float64 {
	if cap(b) < n {
		return make([]float64, n, n+n/2)
	}
	return b[:n]
}

func growI(b []int, n int) []int {
	if cap(b) < n {
		return make([]int, n, n+n/2)
	}
	return b[:n]
}

// numValues validates and returns K for id.
func numValues(st Stats, id graphidx.EntityID) (int, error) {
	k := st.NumValues(id)
	if k < 1 {
		return 0, fmt.Errorf("%w: entity %d", ErrUnknownEntity, id)
	}
	if k > graphidx.MaxValues {
		return 0, fmt.Errorf("%w: entity %d has %d values, above the limit %d", ErrBadStats, id, k, graphidx.MaxValues)
	}
	return k, nil
}

// PairPrefetcher is an optional interface of a Stats whose Pair reads a
// large index: WantPair announces that Pair(a, b) will be asked soon, ent
// naming b's entry in RankedNeighbors(a) when the caller read b there
// (graphidx.NoPairHint otherwise), and FetchPairs looks every announced
// pair up at once, so that their cache misses overlap instead of forming
// one dependent chain of reads per Pair call. Neither may change an answer
// of Pair, and a caller calls FetchPairs after its WantPair calls before it
// asks for any pair. The Bayes model announces the pairs of each pass of
// its influence bound and of each witness of its separation check that it
// will read whatever their answers. The router's per-decision statistics
// implement it (through its pair memo).
type PairPrefetcher interface {
	WantPair(a, b graphidx.EntityID, ent uint32)
	FetchPairs()
}

// KnownSignalBounder is an optional interface of a Stats that keeps, with
// the pairs it has looked up, the signal bounds a Bayes model computed of
// them (Bayes.EdgeCostBound): KnownSignalBound returns sig.SignalBound of
// Pair(a, b) in that orientation when it has it, bit for bit, and ok false
// otherwise (then the model computes it). The chain score's edges are
// mostly edges the search has already costed; the router's per-decision
// statistics implement it (through its pair memo).
type KnownSignalBounder interface {
	KnownSignalBound(sig *Bayes, a, b graphidx.EntityID) (lb float64, ok bool)
}

// pair looks up (a, b) and checks the answer against the request.
func pair(st Stats, a, b graphidx.EntityID, ka, kb int) (graphidx.PairStats, bool, error) {
	ps, ok := st.Pair(a, b)
	if !ok {
		return ps, false, nil
	}
	if ps.A != a || ps.B != b || ps.KA != ka || ps.KB != kb {
		return ps, false, fmt.Errorf("%w: Pair(%d, %d) returned pair (%d, %d) of size %d×%d, want %d×%d",
			ErrBadStats, a, b, ps.A, ps.B, ps.KA, ps.KB, ka, kb)
	}
	return ps, true, nil
}

// setPath records s, bridges, t, checks that no entity repeats (O(L²) for a
// path of L nodes; chains are short) and that u is a value of s.
func (ws *Workspace) setPath(st Stats, s graphidx.EntityID, u int, bridges []graphidx.EntityID, t graphidx.EntityID) error {
	if st == nil {
		return fmt.Errorf("%w: nil Stats", ErrBadStats)
	}
	n := len(bridges) + 2
	ws.path = append(ws.path[:0], s)
	ws.path = append(ws.path, bridges...)
	ws.path = append(ws.path, t)
	ws.ks = growI(ws.ks, n)
	for i, id := range ws.path {
		for _, prev := range ws.path[:i] {
			if prev == id {
				return fmt.Errorf("%w: entity %d appears twice in path %v", ErrBadPath, id, ws.path)
			}
		}
		k, err := numValues(st, id)
		if err != nil {
			return err
		}
		ws.ks[i] = k
	}
	if u < 0 || u >= ws.ks[0] {
		return fmt.Errorf("%w: value %d of entity %d, which has %d values", ErrValueRange, u, s, ws.ks[0])
	}
	return nil
}

// loadEdges fills the posterior-mean matrices M_k and the row factors
// 1/(n_r + K_k α + 1) for every edge of the path set by setPath, and returns
// the smallest edge support; each edge's support is kept in ws.sup. An edge
// never observed gets the prior (all-zero counts) and support 0. Cost
// O(Σ_k K_(k−1)·K_k) plus the Stats lookups.
//
// With sig non-nil, ws.lb[k-1] is also set to sig.signalBound of edge k
// (O(K_(k−1)·K_k) more per edge).
func (ws *Workspace) loadEdges(st Stats, alpha float64, sig *Bayes) (uint64, error) {
	edges := len(ws.path) - 1
	ws.toff = growI(ws.toff, edges+1)
	ws.coff = growI(ws.coff, edges+1)
	tn, cn := 0, 0
	for k := 0; k < edges; k++ {
		ws.toff[k], ws.coff[k] = tn, cn
		tn += ws.ks[k] * ws.ks[k+1]
		cn += ws.ks[k]
	}
	ws.toff[edges], ws.coff[edges] = tn, cn
	ws.theta = growF(ws.theta, tn)
	ws.cinv = growF(ws.cinv, cn)

	ws.sup = ws.sup[:0]
	ws.lb = ws.lb[:0]
	minSup := ^uint64(0)
	for k := 0; k < edges; k++ {
		ka, kb := ws.ks[k], ws.ks[k+1]
		ps, ok, err := pair(st, ws.path[k], ws.path[k+1], ka, kb)
		if err != nil {
			return 0, err
		}
		th := ws.theta[ws.toff[k]:ws.toff[k+1]]
		ci := ws.cinv[ws.coff[k]:ws.coff[k+1]]
		sup := fillMeans(th, ci, ps, ok, ka, kb, alpha)
		ws.sup = append(ws.sup, sup)
		if sig != nil {
			lb, known := 0.0, false
			if kb, isKB := st.(KnownSignalBounder); isKB && ok {
				lb, known = kb.KnownSignalBound(sig, ws.path[k], ws.path[k+1])
			}
			if !known {
				lb = sig.signalBound(ps, ok)
			}
			ws.lb = append(ws.lb, lb)
		}
		minSup = min(minSup, sup)
	}
	return minSup, nil
}

// growMeans is fillMeans of a stored table (ok = true) into th and ci
// grown to hold it (ka·kb and ka entries, growF); it returns the grown
// slices. No allocation once they have grown.
func growMeans(th, ci []float64, ps graphidx.PairStats, ka, kb int, alpha float64) ([]float64, []float64) {
	th, ci = growF(th, ka*kb), growF(ci, ka)
	fillMeans(th, ci, ps, true, ka, kb, alpha)
	return th, ci
}

// fillMeans writes θ_r = (N[r][·] + α)/(n_r + K_b α) for every row r into th
// (ka×kb, row-major) and 1/(n_r + K_b α + 1) into ci; it returns the pair
// support Σ_r n_r. ok=false means all-zero counts.
func fillMeans(th, ci []float64, ps graphidx.PairStats, ok bool, ka, kb int, alpha float64) uint64 {
	kbA := float64(kb) * alpha
	if !ok {
		inv := 1 / float64(kb)
		for i := range th {
			th[i] = inv
		}
		c := 1 / (kbA + 1)
		for i := range ci {
			ci[i] = c
		}
		return 0
	}
	var sup uint64
	for r := 0; r < ka; r++ {
		row := th[r*kb : r*kb+kb]
		var n uint64
		for v := range row {
			c := ps.Count(r, v)
			n += uint64(c)
			row[v] = float64(c) + alpha
		}
		d := float64(n) + kbA
		inv := 1 / d
		for v := range row {
			row[v] *= inv
		}
		ci[r] = 1 / (d + 1)
		sup += n
	}
	return sup
}

// dense points h at data as an r×c row-major matrix with the given stride.
func dense(h *mat.Dense, data []float64, r, c, stride int) *mat.Dense {
	h.SetRawMatrix(blas64.General{Rows: r, Cols: c, Stride: stride, Data: data[:(r-1)*stride+c]})
	return h
}

// SeparationWitnesses returns the witnesses whose tables the separation
// check of the last Chain call (or of its PendingBias, when deferred) read
// in full, whether or not they charged the chain: for a bridge, its
// successor when observed with its predecessor, else neighbours of the
// bridge and, for a one-bridge chain, of the observed entity (docs/QUALITY.md
// §1 and §4d). Empty when the check had no table to test against, or was
// not run (yet). The slice is the workspace's: valid until its next call.
func (ws *Workspace) SeparationWitnesses() []graphidx.EntityID { return ws.sepWit }

// SeparationPrevShare returns the share, in [0, 1], of the last separation
// check's bias S that witnesses on the observed entity's side (docs/QUALITY.md
// §4d) account for: Σ_k of each bridge's largest prev-side bias over S,
// capped at 1. A prev-side witness tests the route into the target itself,
// so its deficit says the chain's shift of the target is overstated
// (docs/QUALITY.md §4g). 0 when the check charged nothing or was not run.
func (ws *Workspace) SeparationPrevShare() float64 { return ws.sepPrevFrac }
