package router

import (
	"context"
	"errors"
	"fmt"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// ErrStaleDecision is returned by ChainDists when the decision was computed
// on an index generation that is no longer the router's current one (the
// index was swapped in between), so its bridges cannot be re-read.
var ErrStaleDecision = errors.New("router: decision belongs to another index generation")

// BridgeDist is the chain's distribution at one bridge: what the chain
// From = Value → b_1 → … → b_k expects b_k to be.
type BridgeDist struct {
	Entity string    // the bridge's entity id
	Values []string  // the bridge's value labels (a copy, ascending byte order)
	Dist   []float64 // x_k over Values (sums to 1)
}

// ChainDists returns, for each bridge b_k of d's chain (d.Chain.Bridges, in
// order), the intermediate distribution
//
//	x_k = e_uᵀ M_1 M_2 … M_k,
//
// where e_u is the indicator of the observed value u of From and M_j is the
// model's posterior-mean conditional matrix of the j-th link (row i:
// P(b_j | b_(j−1) = i)). It is the distribution the scorer's own Chain
// call gives for the prefix From → b_1 → … → b_k (so x_k is exactly what
// the chain carries forward to the next link); at the first bridge, where
// that prefix has no bridge, it is row u of M_1 under the chain's hop prior
// (scorer.Bayes.HopRow) rather than the direct estimate of (From, b_1),
// whose prior differs. The decision's Chain.Estimate is x_(m+1) at the
// target. For a parallel answer (ChainResult.Parallel) each bridge's
// distribution is that row of (From, b_k), P(b_k | From = u), which is what
// that answer reads.
//
// The matrices are the current configuration's (a Reconfigure of α between
// the decision and this call changes them). This is a separate call so
// that Decide stays as it is: a decision does not
// carry the intermediate rows, and most callers never need them. It returns
// nil and no error when d has no chain. Errors: ErrClosed,
// ErrStaleDecision (d.Generation is not the current index generation),
// ErrUnknownEntity / ErrUnknownValue when q does not resolve (q must be the
// query d answered), the context's error, and scorer errors.
//
// Cost: m prefix chains of 1..m links, O(m²·K³) in all with K the largest
// value count on the path (m ≤ 3, so at most six link products), plus one
// copy of each bridge's labels and distribution. Not cached.
func (r *Router) ChainDists(ctx context.Context, q Query, d Decision) ([]BridgeDist, error) {
	if d.Chain == nil || len(d.Chain.Bridges) == 0 {
		return nil, nil
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	st := r.cfg.Load()
	h, err := r.acquire()
	if err != nil {
		return nil, err
	}
	defer h.release()
	if d.Generation != h.gen {
		return nil, fmt.Errorf("%w: decision generation %016x, current %016x", ErrStaleDecision, d.Generation, h.gen)
	}
	g := h.g
	s, ok := g.Lookup(q.From)
	if !ok {
		return nil, fmt.Errorf("%w: %q", ErrUnknownEntity, q.From)
	}
	u, ok := g.ValueIndex(s, q.Value)
	if !ok {
		return nil, fmt.Errorf("%w: %q for entity %q", ErrUnknownValue, q.Value, q.From)
	}
	ids := make([]graphidx.EntityID, len(d.Chain.Bridges))
	for i, b := range d.Chain.Bridges {
		id, ok := g.Lookup(b)
		if !ok {
			return nil, fmt.Errorf("%w: bridge %q", ErrUnknownEntity, b)
		}
		ids[i] = id
	}
	model := st.modelFor(h)
	hr, hasHop := model.(hopRower)
	ws := scorer.NewWorkspace()
	out := make([]BridgeDist, len(ids))
	for k, id := range ids {
		prefix := ids[:k]
		if d.Chain.Parallel {
			// Each bridge of a parallel answer is read from s = u alone.
			prefix = ids[:0]
		}
		var dist []float64
		if len(prefix) == 0 && hasHop {
			// The first hop's row under the chain's own prior, not the
			// direct estimate of (s, b_k), whose prior may differ.
			dist, err = hr.HopRow(nil, g, s, u, id)
		} else {
			var est scorer.Estimate
			est, err = model.Chain(ws, g, s, u, prefix, id)
			dist = est.Dist
		}
		if err != nil {
			return nil, fmt.Errorf("router: chain distribution at bridge %q: %w", d.Chain.Bridges[k], err)
		}
		out[k] = BridgeDist{Entity: d.Chain.Bridges[k], Values: cloneLabels(g.Values(id)), Dist: dist}
	}
	return out, nil
}

// hopRower is a model whose chains read their first hop under a prior of
// their own (scorer.Bayes.HopRow): ChainDists shows that row at the first
// bridge.
type hopRower interface {
	HopRow(dst []float64, st scorer.Stats, a graphidx.EntityID, r int, c graphidx.EntityID) ([]float64, error)
}

// ModelName is the name of the error model that scores decisions on the
// current index ("bayes" or "support" for the built-in models; without
// WithModel, "support" exactly when the index is presence-only). "" after
// Close.
func (r *Router) ModelName() string {
	h := r.cur.Load()
	if h == nil {
		return ""
	}
	return r.cfg.Load().modelFor(h).Name()
}

// PresenceOnly reports whether the current index records presence only
// (scorer.PresenceOnly): its decisions have no distribution to report, and
// their error figures are the support proxy unless a model was set with
// WithModel. False after Close.
func (r *Router) PresenceOnly() bool {
	h := r.cur.Load()
	return h != nil && h.presence
}

// EntityValues returns a copy of the value labels the current index knows
// for entity (ascending byte order), or ErrUnknownEntity, or ErrClosed.
// For error messages and query forms. O(K + Σ len(labels)).
func (r *Router) EntityValues(entity string) ([]string, error) {
	h, err := r.acquire()
	if err != nil {
		return nil, err
	}
	defer h.release()
	id, ok := h.g.Lookup(entity)
	if !ok {
		return nil, fmt.Errorf("%w: %q", ErrUnknownEntity, entity)
	}
	return cloneLabels(h.g.Values(id)), nil
}

// acquire takes a reference on the current index handle; the caller
// releases it. ErrClosed after Close.
func (r *Router) acquire() (*handle, error) {
	h := r.cur.Load()
	for h != nil && !h.tryAcquire() {
		h = r.cur.Load()
	}
	if h == nil {
		return nil, ErrClosed
	}
	return h, nil
}
