package bench

import (
	"context"
	"fmt"
	"slices"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
	"github.com/hopwise/hopwise/scorer"
)

// MapBaseline is the straightforward baseline: the index copied into nested
// Go maps keyed by entity name, map[from]map[to]*pair, with each entity's
// neighbours pre-sorted by support at load (the same precomputation the
// index stores), searched by the bounded breadth-first beam search of
// beamSearch and scored with the same scorer model.
type MapBaseline struct {
	adj    map[string]map[string]*mapPair
	ranked map[string][]string
	values map[string][]string
	// margs holds each entity's marginal value counts (nil when the
	// source graph has none), copied like the tables.
	margs  map[string][]uint64
	ids    map[string]graphidx.EntityID
	names  []string
	model  scorer.Model
	bounds Bounds
}

// mapPair is the table of the ordered pair (key, inner key), row-major in
// that orientation.
type mapPair struct {
	support uint64
	ka, kb  int
	counts  []uint32
}

// LoadMap copies ix into a MapBaseline. O(N + E) time and memory (each pair
// is stored in both orientations).
func LoadMap(ix router.Graph, model scorer.Model, b Bounds) (*MapBaseline, error) {
	if err := b.validate(); err != nil {
		return nil, err
	}
	n := ix.NumEntities()
	m := &MapBaseline{
		adj:    make(map[string]map[string]*mapPair, n),
		ranked: make(map[string][]string, n),
		values: make(map[string][]string, n),
		margs:  make(map[string][]uint64, n),
		ids:    make(map[string]graphidx.EntityID, n),
		names:  make([]string, n),
		model:  model,
		bounds: b,
	}
	for i := 0; i < n; i++ {
		id := graphidx.EntityID(i)
		name := ix.Name(id)
		m.names[i] = name
		m.ids[name] = id
		m.values[name] = append([]string(nil), ix.Values(id)...)
		m.margs[name] = copyMarginal(ix, id)
		m.adj[name] = make(map[string]*mapPair, len(ix.Neighbors(id)))
	}
	var sup []uint64
	for i := 0; i < n; i++ {
		id := graphidx.EntityID(i)
		name := m.names[i]
		nb := append([]graphidx.EntityID(nil), ix.Neighbors(id)...)
		sup = sup[:0]
		for _, y := range nb {
			ps, ok := ix.Pair(id, y)
			if !ok {
				return nil, fmt.Errorf("bench: index lists %d as a neighbour of %d without statistics", y, id)
			}
			p := &mapPair{support: ps.Support(), ka: ps.KA, kb: ps.KB, counts: make([]uint32, ps.KA*ps.KB)}
			for a := 0; a < ps.KA; a++ {
				for c := 0; c < ps.KB; c++ {
					p.counts[a*ps.KB+c] = ps.Count(a, c)
				}
			}
			m.adj[name][m.names[y]] = p
			sup = append(sup, p.support)
		}
		rankBySupport(nb, sup)
		rk := make([]string, len(nb))
		for j, y := range nb {
			rk[j] = m.names[y]
		}
		m.ranked[name] = rk
	}
	return m, nil
}

// mapAdj adapts MapBaseline to adjacency[string].
type mapAdj struct{ m *MapBaseline }

func (a mapAdj) ranked(x string) []string { return a.m.ranked[x] }
func (a mapAdj) pair(x, y string) (graphidx.PairStats, bool) {
	ix, iy := a.m.ids[x], a.m.ids[y]
	if ix > iy {
		x, y, ix, iy = y, x, iy, ix
	}
	p, ok := a.m.adj[x][y]
	if !ok {
		return graphidx.PairStats{}, false
	}
	return graphidx.NewPairStats(ix, iy, p.ka, p.kb, p.counts), true
}
func (a mapAdj) id(x string) graphidx.EntityID { return a.m.ids[x] }

// NumValues implements scorer.Stats over the maps.
func (m *MapBaseline) NumValues(id graphidx.EntityID) int {
	if int(id) >= len(m.names) {
		return 0
	}
	return len(m.values[m.names[id]])
}

// Marginal implements scorer.Marginals over the maps, so the model's
// direct estimate shrinks toward the same marginals as on the index.
func (m *MapBaseline) Marginal(id graphidx.EntityID) []uint64 {
	if int(id) >= len(m.names) {
		return nil
	}
	return m.margs[m.names[id]]
}

// Pair implements scorer.Stats over the maps.
func (m *MapBaseline) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	if int(a) >= len(m.names) || int(b) >= len(m.names) {
		return graphidx.PairStats{}, false
	}
	p, ok := m.adj[m.names[a]][m.names[b]]
	if !ok {
		return graphidx.PairStats{}, false
	}
	return graphidx.NewPairStats(a, b, p.ka, p.kb, p.counts), true
}

// Decide answers q with the map baseline under the bounds given at load.
// Safe for concurrent use.
func (m *MapBaseline) Decide(ctx context.Context, q router.Query) (Result, error) {
	return m.DecideWith(ctx, q, m.bounds)
}

// DecideWith answers q under the bounds b.
func (m *MapBaseline) DecideWith(_ context.Context, q router.Query, b Bounds) (Result, error) {
	var r Result
	if err := b.validate(); err != nil {
		return r, err
	}
	if q.From == q.To {
		return r, router.ErrSameEntity
	}
	sid, ok1 := m.ids[q.From]
	tid, ok2 := m.ids[q.To]
	if !ok1 || !ok2 {
		return r, router.ErrUnknownEntity
	}
	u := -1
	for i, v := range m.values[q.From] {
		if v == q.Value {
			u = i
		}
	}
	if u < 0 {
		return r, router.ErrUnknownValue
	}
	ws := scorer.NewWorkspace()
	dir, err := m.model.Direct(ws, m, sid, u, tid)
	if err != nil {
		return r, err
	}
	r.DirectErr = dir.Err
	sr := &search{st: m, model: m.model, ws: ws, b: b, sid: sid, tid: tid, u: u, directErr: dir.Err}
	if dir.Support > 0 {
		sr.ref, sr.refVar = dir.Dist, dir.Var // the pair's own counts carry no screening-off bias
	}
	err = beamSearch[string](mapAdj{m}, sr, q.From, q.To, &r, func(id graphidx.EntityID) string { return m.names[id] })
	return r, err
}

// RankedNeighbors implements scorer.RankedNeighborer, so the model's
// separation check finds the same witnesses as on the index: the
// neighbours in support order. It allocates (a baseline, not a fast path).
func (m *MapBaseline) RankedNeighbors(id graphidx.EntityID) []graphidx.EntityID {
	r := m.ranked[m.names[id]]
	out := make([]graphidx.EntityID, len(r))
	for i, x := range r {
		out[i] = m.ids[x]
	}
	return out
}

// Neighbors implements scorer.NeighborLister, so the model's influence
// bound reads the same neighbour lists as on the index: ascending ids. It
// allocates (a baseline, not a fast path).
func (m *MapBaseline) Neighbors(id graphidx.EntityID) []graphidx.EntityID {
	l := m.RankedNeighbors(id) // a fresh copy
	slices.Sort(l)
	return l
}
