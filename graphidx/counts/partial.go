package counts

import (
	"fmt"
	"maps"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/hopwise/hopwise/graphidx"
)

// Partial is a mergeable set of co-occurrence counts keyed by names: the
// unit of work of a distributed or incremental build. Counts are plain
// sums, so Merge is associative and commutative, and any split of a corpus
// into Partials merged in any order compiles to the same Source as Build
// over the whole corpus (a test checks this against Compile).
//
// Partial favours clarity over speed (string-keyed maps, O(Σ n²) map
// updates); Build is the fast single-machine path. Not safe for concurrent
// use; merge per-goroutine Partials instead.
type Partial struct {
	contexts uint64
	marg     map[string]map[string]uint64
	cells    map[partialCell]uint64
}

// partialCell is one table cell of an unordered pair, oriented A < B by name.
type partialCell struct{ A, B, U, V string }

// NewPartial returns an empty Partial.
func NewPartial() *Partial {
	return &Partial{marg: map[string]map[string]uint64{}, cells: map[partialCell]uint64{}}
}

// NumCells is the number of distinct pair-table cells counted (each costs
// a map entry; marginals are not included). O(1).
func (p *Partial) NumCells() int { return len(p.cells) }

// Contexts is the number of contexts added or merged.
func (p *Partial) Contexts() uint64 { return p.contexts }

// Add counts one context: its entities' marginals and one cell for each
// unordered pair. It rejects empty names (ErrEmptyName), repeated entities
// (ErrDuplicateEntity) and a 65th value of an entity (ErrTooManyValues),
// leaving p unchanged. O(n²) for n observations.
func (p *Partial) Add(c graphidx.Context) error {
	return p.AddShards(c, 1, nil)
}

// AddShards counts one context like Add, except that it keeps only the
// pair cells whose count shard of n (CountCell.Shard) satisfies keep (nil
// keeps all); marginals and the context total are always counted. Counting a corpus
// once per group of shards bounds the Partial to that group's cells, and
// each group's shards are then byte-identical to those written from a
// Partial of the whole corpus (WriteCountShards). O(n²) for n observations,
// plus one hash per pair.
func (p *Partial) AddShards(c graphidx.Context, n int, keep func(shard int) bool) error {
	obs := slices.Clone(c.Obs)
	slices.SortFunc(obs, func(a, b graphidx.Observation) int { return strings.Compare(a.Entity, b.Entity) })
	if err := p.checkSorted(obs, c.ID); err != nil {
		return err
	}
	all := keep == nil || (n <= 1 && keep(0))
	none := !all && n <= 1
	p.contexts++
	for i, o := range obs {
		m := p.marg[o.Entity]
		if m == nil {
			m = map[string]uint64{}
			p.marg[o.Entity] = m
		}
		m[o.Value]++
		for _, q := range obs[i+1:] {
			if all || (!none && keep(CountCell{A: o.Entity, B: q.Entity}.Shard(n))) {
				p.cells[partialCell{o.Entity, q.Entity, o.Value, q.Value}]++
			}
		}
	}
	return nil
}

// checkSorted applies Add's checks to the observations of context id,
// sorted by entity, without counting them.
func (p *Partial) checkSorted(obs []graphidx.Observation, id string) error {
	c := graphidx.Context{ID: id}
	for i, o := range obs {
		if o.Entity == "" || o.Value == "" {
			return fmt.Errorf("%w: context %s", graphidx.ErrEmptyName, strconv.Quote(c.ID))
		}
		if i > 0 && o.Entity == obs[i-1].Entity {
			return fmt.Errorf("%w: context %s: entity %s", graphidx.ErrDuplicateEntity, strconv.Quote(c.ID), strconv.Quote(o.Entity))
		}
		if m := p.marg[o.Entity]; len(m) >= graphidx.MaxValues {
			if _, ok := m[o.Value]; !ok {
				return fmt.Errorf("%w: entity %s, value %s in context %s", graphidx.ErrTooManyValues,
					strconv.Quote(o.Entity), strconv.Quote(o.Value), strconv.Quote(c.ID))
			}
		}
	}
	return nil
}

// Merge adds the counts of q to p. q is not modified. O(|q|).
func (p *Partial) Merge(q *Partial) {
	p.contexts += q.contexts
	for e, qm := range q.marg {
		m := p.marg[e]
		if m == nil {
			m = make(map[string]uint64, len(qm))
			p.marg[e] = m
		}
		for v, n := range qm {
			m[v] += n
		}
	}
	for k, n := range q.cells {
		p.cells[k] += n
	}
}

// Compile returns the pruned Source of the counts: entities by ascending
// name, values ascending, pairs by ascending (A, B). Only WithMinSupport and
// WithMaxNeighbors are used from opts. It fails with ErrTooManyValues when
// merging gave an entity more than MaxValues values, and ErrCountOverflow
// when a cell exceeds MaxUint32. O(C log C) for C cells.
func (p *Partial) Compile(opts ...graphidx.BuildOption) (graphidx.Source, graphidx.PruneStats, error) {
	if err := graphidx.CheckBuildOptions(opts); err != nil {
		return nil, graphidx.PruneStats{}, err
	}
	names := slices.Sorted(maps.Keys(p.marg))
	id := make(map[string]uint32, len(names))
	src := &partialSource{contexts: p.contexts, ents: make([]graphidx.EntityRecord, len(names))}
	valIdx := make([]map[string]int, len(names))
	for i, n := range names {
		id[n] = uint32(i)
		vals := slices.Sorted(maps.Keys(p.marg[n]))
		if len(vals) > graphidx.MaxValues {
			return nil, graphidx.PruneStats{}, fmt.Errorf("%w: entity %s has %d", graphidx.ErrTooManyValues, strconv.Quote(n), len(vals))
		}
		rec := graphidx.EntityRecord{Name: n, Values: vals, Marginal: make([]uint64, len(vals))}
		valIdx[i] = map[string]int{}
		for j, v := range vals {
			rec.Marginal[j] = p.marg[n][v]
			valIdx[i][v] = j
		}
		src.ents[i] = rec
	}
	type ab struct{ a, b uint32 }
	tables := map[ab][]uint64{}
	for c, n := range p.cells {
		a, b := id[c.A], id[c.B]
		ka, kb := len(src.ents[a].Values), len(src.ents[b].Values)
		t := tables[ab{a, b}]
		if t == nil {
			t = make([]uint64, ka*kb)
			tables[ab{a, b}] = t
		}
		t[valIdx[a][c.U]*kb+valIdx[b][c.V]] += n
	}
	keys := slices.SortedFunc(maps.Keys(tables), func(x, y ab) int {
		if x.a != y.a {
			return int(x.a) - int(y.a)
		}
		return int(x.b) - int(y.b)
	})
	for _, k := range keys {
		t := tables[k]
		counts := make([]uint32, len(t))
		for i, x := range t {
			if x > math.MaxUint32 {
				return nil, graphidx.PruneStats{}, fmt.Errorf("%w: pair %s, %s", graphidx.ErrCountOverflow, strconv.Quote(names[k.a]), strconv.Quote(names[k.b]))
			}
			counts[i] = uint32(x)
		}
		src.pairs = append(src.pairs, graphidx.PairRecord{A: k.a, B: k.b, Counts: counts})
	}
	f, st, err := graphidx.PlanPrune(len(names), opts, func(fn func(a, b uint32, sup uint64) error) error {
		for _, pr := range src.pairs {
			if err := fn(pr.A, pr.B, pr.Support()); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return nil, st, err
	}
	kept := src.pairs[:0]
	for _, pr := range src.pairs {
		if f.Keep(pr.A, pr.B, pr.Support()) {
			kept = append(kept, pr)
		}
	}
	src.pairs = kept
	return src, st, nil
}

// partialSource is the in-memory Source compiled from a Partial.
type partialSource struct {
	contexts uint64
	ents     []graphidx.EntityRecord
	pairs    []graphidx.PairRecord
}

func (s *partialSource) Contexts() uint64                  { return s.contexts }
func (s *partialSource) Entities() []graphidx.EntityRecord { return s.ents }
func (s *partialSource) Pairs(fn func(graphidx.PairRecord) error) error {
	for _, p := range s.pairs {
		if err := fn(p); err != nil {
			return err
		}
	}
	return nil
}
