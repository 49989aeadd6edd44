package router

import (
	"cmp"
	"math/bits"
	"slices"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// Bridge search (DESIGN.md §4).
//
// A chain with m bridges s=b0 → b1 → … → bm → t=b(m+1) is generated as a
// forward beam path s…x of d hops, a middle node z ∈ N(x) ∩ N(y) found by a
// sorted-list intersection, and a backward beam path y…t of e hops, with
// m = d + e + 1:
//
//	m=1: (d,e) = (0,0)            N(s) ∩ N(t)
//	m=2: (1,0) and (0,1)          x ∈ F1: N(x) ∩ N(t);   y ∈ T1: N(s) ∩ N(y)
//	m=3: (2,0) and (0,2)          x ∈ F2: N(x) ∩ N(t);   y ∈ T2: N(s) ∩ N(y)
//
// F1 (T1) holds the B cheapest neighbours of s (t), read from the
// support-ranked adjacency prefix; F2 (T2) holds the B cheapest two-hop
// paths, produced best-first by a lazy k-way merge over the ranked lists of
// the F1 (T1) nodes. Both sides meet on the intersection node, so a chain is
// found when either its forward or its backward half is in a beam.
//
// Stage 1 scores every generated chain by the additive proxy
// Σ_edges model.EdgeCost(support) + model.HopBias()·m and keeps the k
// cheapest in a bounded max-heap (duplicates from the two directions are
// dropped). Stage 2 scores those k exactly with model.Chain and picks the
// largest score: the gain E_direct − E_chain, or λ·gain − c_hop·m.
//
// Cost: O(B·log B + (|F1|+|T1|+|F2|+|T2|+1)·I + k·C) where I is the cost
// of one intersection, O(|a|+|b|) by merge or O(|a|·log(|b|/|a|)) by
// galloping when |b| > 32·|a|, and C the cost of one exact chain score
// (O(m·K³)). Everything touching adjacency is charged to the expansion
// budget, so a hub with millions of neighbours costs at most the budget.
//
// Completeness: when no bound cuts the search (beam layers hold every
// neighbour, the heap never overflows, the budget and deadline are not
// reached) every simple chain of at most H bridges is generated and scored
// exactly, so the result is the exact optimum. Otherwise Truncated is set.
// EdgeCost must be ≥ 0 (pruning relies on it) and is assumed non-increasing
// in support (the beams read support-ranked lists in order).

type step1 struct {
	id   graphidx.EntityID
	cost float64
}

// step2 is a two-hop beam path origin → a → b with its edge costs
// c1 = cost(origin, a) and c2 = cost(a, b).
type step2 struct {
	a, b   graphidx.EntityID
	c1, c2 float64
	cost   float64
}

type mergeItem struct {
	cost float64
	c2   float64
	li   int32 // index into the layer-1 slice
	pos  int32 // position in the ranked list of layer1[li]
	id   graphidx.EntityID
}

type cand struct {
	cost float64
	b    [MaxBridgesLimit]graphidx.EntityID
	m    uint8
}

// budget charges adjacency work and polls the context deadline.
type budget struct {
	left      int
	used      int
	nextCheck int
	done      <-chan struct{}
	exhausted bool
	deadline  bool
}

const deadlinePoll = 2048

// take grants up to n units; fewer (possibly 0) when the budget or the
// deadline ran out, which it records.
func (b *budget) take(n int) int {
	if b.left <= 0 {
		if n > 0 {
			b.exhausted = true
		}
		return 0
	}
	if n > b.left {
		n = b.left
		b.exhausted = true
	}
	b.left -= n
	b.used += n
	if b.done != nil && b.used >= b.nextCheck {
		b.nextCheck = b.used + deadlinePoll
		select {
		case <-b.done:
			b.deadline = true
			b.exhausted = true
			b.left = 0
		default:
		}
	}
	return n
}

// scratch is per-call working memory, pooled per router.
type scratch struct {
	ws     *scorer.Workspace
	f1, t1 []step1
	f2, t2 []step2
	mh     []mergeItem
	heap   []cand
	hits   []graphidx.EntityID
	path   []graphidx.EntityID
	dist   []float64 // best chain's Dist copy
	ddist  []float64 // direct Dist copy

	// per call
	g     Graph
	model scorer.Model
	st    *settings
	s, t  graphidx.EntityID
	hb    float64
	bud   budget
	kCut  bool // the candidate heap overflowed or pruned
}

func newScratch() *scratch { return &scratch{ws: scorer.NewWorkspace()} }

func (sc *scratch) reset() {
	sc.g, sc.model, sc.st = nil, nil, nil
	sc.kCut = false
	sc.bud = budget{}
}

// edge returns the proxy cost of the pair (a, b); ok is false when the pair
// has no statistics or the budget is out.
func (sc *scratch) edge(a, b graphidx.EntityID) (float64, bool) {
	if sc.bud.take(1) == 0 {
		return 0, false
	}
	ps, ok := sc.g.Pair(a, b)
	if !ok {
		return 0, false
	}
	return sc.model.EdgeCost(ps.Support()), true
}

// intersect puts a ∩ b (both ascending) into sc.hits. It reports false when
// the budget cut it short.
func (sc *scratch) intersect(a, b []graphidx.EntityID) bool {
	sc.hits = sc.hits[:0]
	if len(a) > len(b) {
		a, b = b, a
	}
	if len(a) == 0 {
		return true
	}
	if len(b) > 32*len(a) {
		return sc.gallop(a, b)
	}
	want := len(a) + len(b)
	got := sc.bud.take(want)
	i, j := 0, 0
	for n := 0; n < got && i < len(a) && j < len(b); n++ {
		x, y := a[i], b[j]
		switch {
		case x < y:
			i++
		case x > y:
			j++
		default:
			sc.hits = append(sc.hits, x)
			i++
			j++
		}
	}
	return got == want || i == len(a) || j == len(b)
}

// gallop intersects a short list a with a long list b by exponential then
// binary search from the last match (Bentley & Yao 1976; common practice for
// skewed sorted-set intersection). O(|a|·log(|b|/|a|)).
func (sc *scratch) gallop(a, b []graphidx.EntityID) bool {
	per := 2 + 2*bits.Len(uint(len(b)/len(a)))
	j := 0
	for _, x := range a {
		if sc.bud.take(per) < per {
			return false
		}
		// Exponential probe from j: afterwards every b[<lo] < x and
		// hi == len(b) or b[hi] >= x.
		lo, hi, step := j, j, 1
		for hi < len(b) && b[hi] < x {
			lo = hi + 1
			hi = j + step
			step <<= 1
		}
		if hi > len(b) {
			hi = len(b)
		}
		// Binary search in [lo, hi) for the first element >= x.
		for lo < hi {
			mid := int(uint(lo+hi) >> 1)
			if b[mid] < x {
				lo = mid + 1
			} else {
				hi = mid
			}
		}
		j = lo
		if j >= len(b) {
			return true
		}
		if b[j] == x {
			sc.hits = append(sc.hits, x)
			j++
		}
	}
	return true
}

// push offers a candidate to the bounded max-heap of the k cheapest.
func (sc *scratch) push(c cand) {
	h := sc.heap
	k := sc.st.maxCand
	if len(h) == k && c.cost > h[0].cost {
		sc.kCut = true
		return
	}
	for i := range h {
		if h[i].cost == c.cost && h[i].m == c.m && h[i].b == c.b {
			return // the same chain from the other direction
		}
	}
	if len(h) < k {
		h = append(h, c)
		// sift up
		i := len(h) - 1
		for i > 0 {
			p := (i - 1) / 2
			if h[p].cost >= h[i].cost {
				break
			}
			h[p], h[i] = h[i], h[p]
			i = p
		}
		sc.heap = h
		return
	}
	sc.kCut = true
	if c.cost == h[0].cost {
		return // keep the earlier of equal-cost candidates
	}
	h[0] = c
	i := 0
	for {
		l := 2*i + 1
		if l >= len(h) {
			break
		}
		m := l
		if r := l + 1; r < len(h) && h[r].cost > h[l].cost {
			m = r
		}
		if h[i].cost >= h[m].cost {
			break
		}
		h[i], h[m] = h[m], h[i]
		i = m
	}
}

// full reports whether a candidate of the given lower-bound cost can no
// longer enter the heap; it records the cut.
func (sc *scratch) prune(lower float64) bool {
	if len(sc.heap) == sc.st.maxCand && lower >= sc.heap[0].cost {
		sc.kCut = true
		return true
	}
	return false
}

// layer1 fills out with the beam of up to B cheapest neighbours of from
// (other excluded). complete reports that it holds all of them.
func (sc *scratch) layer1(out []step1, from, other graphidx.EntityID, adjacent bool) ([]step1, bool) {
	out = out[:0]
	rk := sc.g.RankedNeighbors(from)
	eligible := len(sc.g.Neighbors(from))
	if adjacent {
		eligible--
	}
	for _, x := range rk {
		if x == other || x == from {
			continue
		}
		if len(out) == sc.st.beam {
			break
		}
		c, ok := sc.edge(from, x)
		if !ok {
			if sc.bud.left <= 0 {
				break
			}
			continue
		}
		out = append(out, step1{id: x, cost: c})
	}
	return out, len(out) == eligible
}

// nextEligible returns the first position ≥ pos in ranked whose node is not
// one of the excluded ids, or -1.
func nextEligible(ranked []graphidx.EntityID, pos int, ex0, ex1, ex2 graphidx.EntityID) int {
	for ; pos < len(ranked); pos++ {
		y := ranked[pos]
		if y != ex0 && y != ex1 && y != ex2 {
			return pos
		}
	}
	return -1
}

func (sc *scratch) mhPush(it mergeItem) {
	h := append(sc.mh, it)
	i := len(h) - 1
	for i > 0 {
		p := (i - 1) / 2
		if h[p].cost <= h[i].cost {
			break
		}
		h[p], h[i] = h[i], h[p]
		i = p
	}
	sc.mh = h
}

func (sc *scratch) mhPop() mergeItem {
	h := sc.mh
	top := h[0]
	n := len(h) - 1
	h[0] = h[n]
	h = h[:n]
	i := 0
	for {
		l := 2*i + 1
		if l >= n {
			break
		}
		m := l
		if r := l + 1; r < n && h[r].cost < h[l].cost {
			m = r
		}
		if h[i].cost <= h[m].cost {
			break
		}
		h[i], h[m] = h[m], h[i]
		i = m
	}
	sc.mh = h
	return top
}

// layer2 extends l1 (rooted at from) best-first by the ranked lists of its
// nodes into up to B two-hop paths from → a → b with b ∉ {from, other, a}.
func (sc *scratch) layer2(out []step2, l1 []step1, l1complete bool, from, other graphidx.EntityID) ([]step2, bool) {
	out = out[:0]
	sc.mh = sc.mh[:0]
	complete := l1complete
	for i, x := range l1 {
		rk := sc.g.RankedNeighbors(x.id)
		if len(rk) < len(sc.g.Neighbors(x.id)) {
			complete = false // only a prefix is ranked
		}
		for pos := nextEligible(rk, 0, from, other, x.id); pos >= 0; pos = nextEligible(rk, pos+1, from, other, x.id) {
			c, ok := sc.edge(x.id, rk[pos])
			if !ok {
				if sc.bud.left <= 0 {
					return out, false
				}
				continue
			}
			sc.mhPush(mergeItem{cost: x.cost + c, c2: c, li: int32(i), pos: int32(pos), id: rk[pos]})
			break
		}
	}
	for len(sc.mh) > 0 {
		if len(out) == sc.st.beam {
			return out, false
		}
		it := sc.mhPop()
		x := l1[it.li]
		out = append(out, step2{a: x.id, b: it.id, c1: x.cost, c2: it.c2, cost: it.cost})
		rk := sc.g.RankedNeighbors(x.id)
		for pos := nextEligible(rk, int(it.pos)+1, from, other, x.id); pos >= 0; pos = nextEligible(rk, pos+1, from, other, x.id) {
			c, ok := sc.edge(x.id, rk[pos])
			if !ok {
				if sc.bud.left <= 0 {
					return out, false
				}
				continue
			}
			sc.mhPush(mergeItem{cost: x.cost + c, c2: c, li: it.li, pos: int32(pos), id: rk[pos]})
			break
		}
	}
	return out, complete && !sc.bud.exhausted
}

// searchResult is the outcome of generate.
type searchResult struct {
	truncated bool
	deadline  bool
}

// generate fills sc.heap with the k proxy-cheapest chains of at most H
// bridges between s and t.
func (sc *scratch) generate(adjacent bool) searchResult {
	g, s, t, H := sc.g, sc.s, sc.t, sc.st.maxBridges
	hb := sc.hb
	sc.heap = sc.heap[:0]
	if H == 0 {
		return searchResult{}
	}
	ns, nt := g.Neighbors(s), g.Neighbors(t)
	complete := true

	// m = 1: N(s) ∩ N(t).
	if !sc.intersect(ns, nt) {
		complete = false
	}
	for _, z := range sc.hits {
		if z == s || z == t {
			continue
		}
		c1, ok1 := sc.edge(s, z)
		if !ok1 {
			complete = false
			continue
		}
		if sc.prune(c1 + hb) {
			continue
		}
		c2, ok2 := sc.edge(z, t)
		if !ok2 {
			complete = false
			continue
		}
		sc.push(cand{cost: c1 + c2 + hb, b: [3]graphidx.EntityID{z}, m: 1})
	}
	if H == 1 {
		return sc.result(complete)
	}

	// m = 2.
	var f1ok, t1ok bool
	sc.f1, f1ok = sc.layer1(sc.f1, s, t, adjacent)
	sc.t1, t1ok = sc.layer1(sc.t1, t, s, adjacent)
	fwd2 := f1ok
	for _, x := range sc.f1 { // (1,0): s → x → z → t
		if sc.prune(x.cost + 2*hb) {
			fwd2 = false
			continue
		}
		if !sc.intersect(g.Neighbors(x.id), nt) {
			fwd2 = false
		}
		for _, z := range sc.hits {
			if z == s || z == t || z == x.id {
				continue
			}
			c2, ok := sc.edge(x.id, z)
			if !ok {
				fwd2 = false
				continue
			}
			p := x.cost + c2
			if sc.prune(p + 2*hb) {
				fwd2 = false
				continue
			}
			c3, ok := sc.edge(z, t)
			if !ok {
				fwd2 = false
				continue
			}
			sc.push(cand{cost: p + c3 + 2*hb, b: [3]graphidx.EntityID{x.id, z}, m: 2})
		}
	}
	bwd2 := t1ok
	for _, y := range sc.t1 { // (0,1): s → z → y → t
		if sc.prune(y.cost + 2*hb) {
			bwd2 = false
			continue
		}
		if !sc.intersect(ns, g.Neighbors(y.id)) {
			bwd2 = false
		}
		for _, z := range sc.hits {
			if z == s || z == t || z == y.id {
				continue
			}
			c1, ok := sc.edge(s, z)
			if !ok {
				bwd2 = false
				continue
			}
			if sc.prune(c1 + y.cost + 2*hb) {
				bwd2 = false
				continue
			}
			c2, ok := sc.edge(z, y.id)
			if !ok {
				bwd2 = false
				continue
			}
			sc.push(cand{cost: c1 + c2 + y.cost + 2*hb, b: [3]graphidx.EntityID{z, y.id}, m: 2})
		}
	}
	complete = complete && (fwd2 || bwd2)
	if H == 2 {
		return sc.result(complete)
	}

	// m = 3.
	var f2ok, t2ok bool
	sc.f2, f2ok = sc.layer2(sc.f2, sc.f1, f1ok, s, t)
	sc.t2, t2ok = sc.layer2(sc.t2, sc.t1, t1ok, t, s)
	fwd3 := f2ok
	for _, x := range sc.f2 { // (2,0): s → a → b → z → t
		if sc.prune(x.cost + 3*hb) {
			fwd3 = false
			continue
		}
		if !sc.intersect(g.Neighbors(x.b), nt) {
			fwd3 = false
		}
		for _, z := range sc.hits {
			if z == s || z == t || z == x.a || z == x.b {
				continue
			}
			c3, ok := sc.edge(x.b, z)
			if !ok {
				fwd3 = false
				continue
			}
			p := x.c1 + x.c2 + c3
			if sc.prune(p + 3*hb) {
				fwd3 = false
				continue
			}
			c4, ok := sc.edge(z, t)
			if !ok {
				fwd3 = false
				continue
			}
			sc.push(cand{cost: p + c4 + 3*hb, b: [3]graphidx.EntityID{x.a, x.b, z}, m: 3})
		}
	}
	bwd3 := t2ok
	for _, y := range sc.t2 { // (0,2): s → z → y.b → y.a → t
		if sc.prune(y.cost + 3*hb) {
			bwd3 = false
			continue
		}
		if !sc.intersect(ns, g.Neighbors(y.b)) {
			bwd3 = false
		}
		for _, z := range sc.hits {
			if z == s || z == t || z == y.a || z == y.b {
				continue
			}
			c1, ok := sc.edge(s, z)
			if !ok {
				bwd3 = false
				continue
			}
			if sc.prune(c1 + y.cost + 3*hb) {
				bwd3 = false
				continue
			}
			c2, ok := sc.edge(z, y.b)
			if !ok {
				bwd3 = false
				continue
			}
			// path order: s→z, z→y.b, y.b→y.a (c2 of y), y.a→t (c1 of y)
			sc.push(cand{cost: c1 + c2 + y.c2 + y.c1 + 3*hb, b: [3]graphidx.EntityID{z, y.b, y.a}, m: 3})
		}
	}
	complete = complete && (fwd3 || bwd3)
	return sc.result(complete)
}

func (sc *scratch) result(complete bool) searchResult {
	return searchResult{
		truncated: !complete || sc.kCut || sc.bud.exhausted,
		deadline:  sc.bud.deadline,
	}
}

// sortCands orders the heap by ascending proxy cost, then hops, then ids.
func (sc *scratch) sortCands() {
	slices.SortFunc(sc.heap, func(a, b cand) int {
		if c := cmp.Compare(a.cost, b.cost); c != 0 {
			return c
		}
		if c := cmp.Compare(a.m, b.m); c != 0 {
			return c
		}
		for i := 0; i < int(a.m); i++ {
			if c := cmp.Compare(a.b[i], b.b[i]); c != 0 {
				return c
			}
		}
		return 0
	})
}
