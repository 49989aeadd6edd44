package bench

import (
	"context"
	"fmt"
	"slices"

	"gonum.org/v1/gonum/graph"
	"gonum.org/v1/gonum/graph/simple"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
)

// GonumBaseline is the library baseline: the index copied into gonum's
// graph/simple.WeightedUndirectedGraph (node id = entity id, edge weight =
// pair support, each edge carrying its count table), with every node's
// neighbours ranked by support at load from gonum's From iterator and
// Weight, searched by the same bounded beam search as MapBaseline (pair
// look-ups through WeightedEdge) and scored with the same model.
type GonumBaseline struct {
	g      *simple.WeightedUndirectedGraph
	ranked [][]int64
	values [][]string
	// margs holds each entity's marginal value counts (nil when the source
	// graph has none), copied like the tables.
	margs  [][]uint64
	names  []string
	ids    map[string]int64
	model  scorer.Model
	bounds Bounds
}

// tableEdge is a gonum weighted edge that carries the pair's count table in
// the orientation (f, t).
type tableEdge struct {
	f, t   simple.Node
	w      float64
	ka, kb int
	counts []uint32
}

func (e *tableEdge) From() graph.Node { return e.f }
func (e *tableEdge) To() graph.Node   { return e.t }
func (e *tableEdge) Weight() float64  { return e.w }
func (e *tableEdge) ReversedEdge() graph.Edge {
	r := &tableEdge{f: e.t, t: e.f, w: e.w, ka: e.kb, kb: e.ka, counts: make([]uint32, len(e.counts))}
	for a := 0; a < e.ka; a++ {
		for b := 0; b < e.kb; b++ {
			r.counts[b*e.ka+a] = e.counts[a*e.kb+b]
		}
	}
	return r
}

// LoadGonum copies ix into a GonumBaseline. O(N + E) time and memory.
func LoadGonum(ix router.Graph, model scorer.Model, b Bounds) (*GonumBaseline, error) {
	if err := b.validate(); err != nil {
		return nil, err
	}
	n := ix.NumEntities()
	gb := &GonumBaseline{
		g:      simple.NewWeightedUndirectedGraph(0, 0),
		ranked: make([][]int64, n),
		values: make([][]string, n),
		margs:  make([][]uint64, n),
		names:  make([]string, n),
		ids:    make(map[string]int64, n),
		model:  model,
		bounds: b,
	}
	for i := 0; i < n; i++ {
		id := graphidx.EntityID(i)
		gb.names[i] = ix.Name(id)
		gb.ids[gb.names[i]] = int64(i)
		gb.values[i] = append([]string(nil), ix.Values(id)...)
		gb.margs[i] = copyMarginal(ix, id)
		gb.g.AddNode(simple.Node(i))
	}
	for i := 0; i < n; i++ {
		id := graphidx.EntityID(i)
		for _, y := range ix.Neighbors(id) {
			if y <= id {
				continue
			}
			ps, ok := ix.Pair(id, y)
			if !ok {
				return nil, fmt.Errorf("bench: index lists %d as a neighbour of %d without statistics", y, id)
			}
			e := &tableEdge{f: simple.Node(id), t: simple.Node(y), w: float64(ps.Support()), ka: ps.KA, kb: ps.KB,
				counts: make([]uint32, ps.KA*ps.KB)}
			for a := 0; a < ps.KA; a++ {
				for c := 0; c < ps.KB; c++ {
					e.counts[a*ps.KB+c] = ps.Count(a, c)
				}
			}
			gb.g.SetWeightedEdge(e)
		}
	}
	var ids []graphidx.EntityID
	var sup []uint64
	for i := 0; i < n; i++ {
		ids, sup = ids[:0], sup[:0]
		it := gb.g.From(int64(i))
		for it.Next() {
			y := it.Node().ID()
			w, _ := gb.g.Weight(int64(i), y)
			ids = append(ids, graphidx.EntityID(y))
			sup = append(sup, uint64(w))
		}
		rankBySupport(ids, sup)
		rk := make([]int64, len(ids))
		for j, y := range ids {
			rk[j] = int64(y)
		}
		gb.ranked[i] = rk
	}
	return gb, nil
}

type gonumAdj struct{ gb *GonumBaseline }

func (a gonumAdj) ranked(x int64) []int64 { return a.gb.ranked[x] }
func (a gonumAdj) pair(x, y int64) (graphidx.PairStats, bool) {
	if x > y {
		x, y = y, x
	}
	// LoadGonum stores every table in ascending id order (f < t).
	e, ok := a.gb.g.WeightedEdge(x, y).(*tableEdge)
	if !ok || e == nil {
		return graphidx.PairStats{}, false
	}
	return graphidx.NewPairStats(graphidx.EntityID(x), graphidx.EntityID(y), e.ka, e.kb, e.counts), true
}
func (a gonumAdj) id(x int64) graphidx.EntityID { return graphidx.EntityID(x) }

// NumValues implements scorer.Stats over the gonum graph.
func (gb *GonumBaseline) NumValues(id graphidx.EntityID) int {
	if int(id) >= len(gb.values) {
		return 0
	}
	return len(gb.values[id])
}

// Marginal implements scorer.Marginals, so the model's direct estimate
// shrinks toward the same marginals as on the index.
func (gb *GonumBaseline) Marginal(id graphidx.EntityID) []uint64 {
	if int(id) >= len(gb.margs) {
		return nil
	}
	return gb.margs[id]
}

// Pair implements scorer.Stats through WeightedEdge.
func (gb *GonumBaseline) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	e, ok := gb.g.WeightedEdge(int64(a), int64(b)).(*tableEdge)
	if !ok || e == nil {
		return graphidx.PairStats{}, false
	}
	if e.f.ID() == int64(a) {
		return graphidx.NewPairStats(a, b, e.ka, e.kb, e.counts), true
	}
	// stored as (b, a): transpose into a fresh table
	c := make([]uint32, len(e.counts))
	for i := 0; i < e.ka; i++ {
		for j := 0; j < e.kb; j++ {
			c[j*e.ka+i] = e.counts[i*e.kb+j]
		}
	}
	return graphidx.NewPairStats(a, b, e.kb, e.ka, c), true
}

// Decide answers q with the gonum baseline under the bounds given at load.
// Safe for concurrent use.
func (gb *GonumBaseline) Decide(ctx context.Context, q router.Query) (Result, error) {
	return gb.DecideWith(ctx, q, gb.bounds)
}

// DecideWith answers q under the bounds b.
func (gb *GonumBaseline) DecideWith(_ context.Context, q router.Query, b Bounds) (Result, error) {
	var r Result
	if err := b.validate(); err != nil {
		return r, err
	}
	if q.From == q.To {
		return r, router.ErrSameEntity
	}
	s, ok1 := gb.ids[q.From]
	t, ok2 := gb.ids[q.To]
	if !ok1 || !ok2 {
		return r, router.ErrUnknownEntity
	}
	u := -1
	for i, v := range gb.values[s] {
		if v == q.Value {
			u = i
		}
	}
	if u < 0 {
		return r, router.ErrUnknownValue
	}
	ws := scorer.NewWorkspace()
	sid, tid := graphidx.EntityID(s), graphidx.EntityID(t)
	dir, err := gb.model.Direct(ws, gb, sid, u, tid)
	if err != nil {
		return r, err
	}
	r.DirectErr = dir.Err
	sr := &search{st: gb, model: gb.model, ws: ws, b: b, sid: sid, tid: tid, u: u, directErr: dir.Err}
	if dir.Support > 0 {
		sr.ref, sr.refVar = dir.Dist, dir.Var // the pair's own counts carry no screening-off bias
	}
	err = beamSearch[int64](gonumAdj{gb}, sr, s, t, &r, func(id graphidx.EntityID) string { return gb.names[id] })
	return r, err
}

// RankedNeighbors implements scorer.RankedNeighborer, so the model's
// separation check finds the same witnesses as on the index: the
// neighbours in support order. It allocates (a baseline, not a fast path).
func (gb *GonumBaseline) RankedNeighbors(id graphidx.EntityID) []graphidx.EntityID {
	r := gb.ranked[id]
	out := make([]graphidx.EntityID, len(r))
	for i, x := range r {
		out[i] = graphidx.EntityID(x)
	}
	return out
}

// Neighbors implements scorer.NeighborLister, so the model's influence
// bound reads the same neighbour lists as on the index: ascending ids. It
// allocates (a baseline, not a fast path).
func (gb *GonumBaseline) Neighbors(id graphidx.EntityID) []graphidx.EntityID {
	l := gb.RankedNeighbors(id) // a fresh copy
	slices.Sort(l)
	return l
}
