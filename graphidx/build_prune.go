package graphidx

import "slices"

// PruneFilter decides which compiled pairs are kept. It is shared by Build,
// Compile and the compilers of graphidx/counts (Partial.Compile,
// MergeCounts) so that every path prunes identically. Read-only once
// planned: safe for concurrent Keep calls.
type PruneFilter struct {
	minSupport uint64
	maxN       int
	top        [][]uint32 // per entity: its top-n neighbour ids, ascending; nil without a limit
}

// nbr is a candidate neighbour in a top-n heap.
type nbr struct {
	sup uint64
	id  uint32
}

// worse reports whether x ranks below y: lower support, or equal support and
// a larger id.
func worse(x, y nbr) bool { return x.sup < y.sup || (x.sup == y.sup && x.id > y.id) }

// offer keeps the n best candidates in h, a heap with the worst at the root.
// O(log n).
func offer(h *[]nbr, n int, c nbr) {
	s := *h
	if len(s) < n {
		s = append(s, c)
		for i := len(s) - 1; i > 0; {
			p := (i - 1) / 2
			if !worse(s[i], s[p]) {
				break
			}
			s[i], s[p] = s[p], s[i]
			i = p
		}
		*h = s
		return
	}
	if !worse(s[0], c) {
		return
	}
	s[0] = c
	for i := 0; ; {
		l, m := 2*i+1, i
		if l < len(s) && worse(s[l], s[m]) {
			m = l
		}
		if r := l + 1; r < len(s) && worse(s[r], s[m]) {
			m = r
		}
		if m == i {
			break
		}
		s[i], s[m] = s[m], s[i]
		i = m
	}
}

// CheckBuildOptions returns the ErrBadBuildOption of the first option of
// opts outside its domain (nil when all are in range), for a compiler
// outside this package that takes build options (graphidx/counts) and
// should refuse them before reading its input. O(len(opts)).
func CheckBuildOptions(opts []BuildOption) error {
	return newBuildConfig(opts).err
}

// PlanPrune is planPrune with the WithMinSupport and WithMaxNeighbors of
// opts (the other options are ignored): the pruning plan for a compiler
// outside this package that enumerates its own pairs. each must call fn for
// every pair, by entity ids below nEnt, with its support; it is called once,
// or twice with a neighbour limit, and must give the same pairs both times.
func PlanPrune(nEnt int, opts []BuildOption, each func(fn func(a, b uint32, sup uint64) error) error) (*PruneFilter, PruneStats, error) {
	cfg := newBuildConfig(opts)
	if cfg.err != nil {
		return nil, PruneStats{}, cfg.err
	}
	return planPrune(nEnt, cfg.minSupport, cfg.maxNeighbors, each)
}

// planPrune scans the pairs once (twice with a neighbour limit) and returns
// the filter and its statistics. each must call fn for every pair with its
// support. Memory O(entities·maxN); time O(P·log maxN).
func planPrune(nEnt int, minSupport uint64, maxN int, each func(fn func(a, b uint32, sup uint64) error) error) (*PruneFilter, PruneStats, error) {
	f := &PruneFilter{minSupport: max(minSupport, 1), maxN: maxN}
	st := PruneStats{MinSupport: f.minSupport, MaxNeighbors: maxN}
	var heaps [][]nbr
	if maxN > 0 {
		heaps = make([][]nbr, nEnt)
	}
	err := each(func(a, b uint32, sup uint64) error {
		st.Before++
		if sup < f.minSupport {
			st.ByMinSupport++
			return nil
		}
		if heaps != nil {
			offer(&heaps[a], maxN, nbr{sup, b})
			offer(&heaps[b], maxN, nbr{sup, a})
		}
		return nil
	})
	if err != nil {
		return nil, st, err
	}
	if heaps == nil {
		st.After = st.Before - st.ByMinSupport
		return f, st, nil
	}
	f.top = make([][]uint32, nEnt)
	for i, h := range heaps {
		ids := make([]uint32, len(h))
		for j, c := range h {
			ids[j] = c.id
		}
		slices.Sort(ids)
		f.top[i] = ids
		heaps[i] = nil
	}
	err = each(func(a, b uint32, sup uint64) error {
		if f.Keep(a, b, sup) {
			st.After++
		} else if sup >= f.minSupport {
			st.ByMaxNeighbors++
		}
		return nil
	})
	return f, st, err
}

// Keep reports whether the pair (a, b) with the given support survives.
// O(log maxNeighbors).
func (f *PruneFilter) Keep(a, b uint32, sup uint64) bool {
	if sup < f.minSupport {
		return false
	}
	if f.top == nil {
		return true
	}
	if _, ok := slices.BinarySearch(f.top[a], b); ok {
		return true
	}
	_, ok := slices.BinarySearch(f.top[b], a)
	return ok
}
