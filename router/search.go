package router

import (
	"cmp"
	"math"
	"math/bits"
	"slices"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// Bridge search (docs/DESIGN.md, Bridge search).
//
// A chain with m bridges is s=b0 → b1 → … → bm → t=b(m+1).
//
//   - m = 1: every b1 ∈ N(s) ∩ N(t), by a merge of the two id-sorted
//     adjacency lists, or a galloping search when one is more than 32×
//     longer. This phase may spend half the budget (the intersection half
//     of that), so a hub leaves room for the rest.
//   - m = 2, 3: meet in the middle. Beams grow from both ends: F1 (T1)
//     holds the B best-ranked (highest-support) neighbours of s (t), read in
//     order from the support-ranked adjacency prefix; F2 (T2) holds B
//     two-hop paths taken breadth-first by rank from the ranked lists of the
//     F1 (T1) nodes. The halves are joined on shared nodes (a hash join
//     whose matches are processed in ascending node-id order, matchJoins):
//     m = 2 from F2 ⋈ T1 (s→a→b, b→t) and F1 ⋈ T2 (s→a, t→c→a); m = 3 from
//     F2 ⋈ T2 (s→a→b, t→c→b, a ≠ c).
//
// Stage 1 ranks the generated chains by the additive proxy
// Σ_edges model.EdgeCost(pair stats) + model.HopBias()·m and keeps the k
// cheapest in a bounded max-heap (a chain met from both sides is kept once).
// For the Bayes model EdgeCost is a signal-loss cost (−log of a lower bound
// of Cramér's V), so the cheapest chains are those that keep the most
// signal; it is not monotone in support. The beams are still support-ranked
// prefixes: support bounds how well an edge is known, and a beam that could
// not hold every neighbour marks the search truncated, so a cheap edge of
// low rank is never silently lost.
//
// Stage 2 (Router.compute) scores the candidates exactly with model.Chain and
// adds a squared-bias term relative to a reference estimate ref:
//
//	Err_c = model Err of c + scorer.ReferenceBias(p̂_c, ref),
//
// the model Err being, for Bayes, Σ_v Var(p̂_c,v) + β·m_c plus its
// missing-signal bias (≥ 0),
//
// where ref is the direct estimate when the pair has support > 0, else the
// estimate of the proxy-cheapest generated chain (smallest cost, then fewer
// bridges, then smaller ids), whose own bias term is 0. It picks the largest
// score: the gain E_direct − Err_c, or λ·gain − c_hop·m. Candidates are
// scored shortest first, and one whose bound (Err_c ≥ β·m_c, so score ≤
// bound(m)) cannot beat the best so far is skipped. When ref is the direct
// estimate it is known before generation, and generation itself scores the
// proxy-best one-bridge chain and skips the two- and three-bridge phases
// whose bound cannot beat it. Without direct support the reference depends
// on every generated chain, so all phases are generated (only exact scoring
// is skipped).
//
// Cost: O(I + B + M·log M + B² + k·C). I is the intersection, O(|a|+|b|)
// by merge or O(|a|·log(|b|/|a|)) by galloping. The beams are read from the
// ranked lists without look-ups and joined by hashing (expected O(B)); the
// M matches are sorted. An edge cost (O(K²): Cramér's V of the pair table)
// is computed once, only for a node or path that takes part in a join. B²
// bounds a join of equal middle nodes, and C is one exact chain
// score (O(m·K³)). List steps cost 1 budget unit and look-ups lookupUnits,
// so a hub with millions of neighbours costs at most the budget; the
// context's deadline is polled every 256 units.
//
// Every pair is read from the graph once per decision (pairMemo; stage 2
// and the direct estimate read the memo too). When the graph implements
// PairBatcher, the pairs of the one-bridge phase and of the joins are
// fetched in one batch each before the phase (prefetchJoins), so that their
// cache misses overlap; the phase then finds them in the memo. The budget
// is charged per edge by the phase exactly as without the batch, so no
// decision changes; a batch holds at most the look-ups the remaining budget
// allows, so a decision's graph look-ups stay below twice the budget's.
//
// Completeness: the result is the exact optimum of the rule above over all
// simple chains of at most H bridges whenever Truncated is false, i.e. when
// the intersection was not cut, (F2 and T1) or (F1 and T2) hold every path
// of their kind (for H ≥ 2), F2 and T2 do (for H = 3), the heap never
// overflowed or pruned, and neither budget nor deadline ran out. Then every
// chain is generated, so the reference is the global proxy minimum and every
// chain is either scored or provably beaten. The pruning rules need only
// EdgeCost ≥ 0 (a partial sum of edge costs, unknown costs counted as 0,
// bounds a chain's proxy cost from below) and Err_c ≥ HopBias()·m (stage-2
// and phase bounds; the variance and bias terms are ≥ 0). No rule assumes
// EdgeCost is monotone in support.

// step1 is a first-layer beam node; cost is its edge cost from the origin,
// NaN until a join needs it (cost1).
type step1 struct {
	id   graphidx.EntityID
	cost float64
}

// step2 is a two-hop beam path origin → a → b; li indexes a in the
// first-layer slice, c2 = cost(a, b) is NaN until a join needs it.
type step2 struct {
	a, b graphidx.EntityID
	li   int32
	c2   float64
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

const deadlinePoll = 256

// lookupUnits is the budget charge of one pair look-up: a binary search in
// a (possibly hub-sized) adjacency list plus the count table costs far more
// than one step of a list intersection (on the benchmark index about
// 0.1–0.3 µs, mostly cache misses in hub lists); 16 is a conservative weight.
const lookupUnits = 16

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

// limit caps the budget at n units until unlimit; it returns the units held
// back.
func (b *budget) limit(n int) int {
	if n >= b.left {
		return 0
	}
	held := b.left - n
	b.left = n
	return held
}

func (b *budget) unlimit(held int) { b.left += held }

// scratch is per-call working memory, pooled per router.
type scratch struct {
	ws     *scorer.Workspace
	f1, t1 []step1
	f2, t2 []step2
	// join matches (matchJoins)
	f1ids, t1ids   idIndex  // layer-1 node → position
	f2ends, t2ends idIndex  // layer-2 end nodes met by both sides (f2ends), of T2
	joinA, joinB   []uint64 // b<<32 | position in f2 (A), t2 (B)
	joinC          []match3
	keysF, keysT   []uint64
	cursor         []int32
	rks            [][]graphidx.EntityID // ranked lists of the layer-1 nodes
	heap           []cand
	hits           []graphidx.EntityID
	path           []graphidx.EntityID
	dist           []float64 // best chain's Dist copy
	ddist          []float64 // direct Dist copy
	// ref is the reference estimate of the bias term (ddist, or incDist of
	// the reference chain); nil until known. refVar is its variance part
	// (scorer.Estimate.Var), for the gain margin (chainScore).
	ref    []float64
	refVar float64

	// incumbent: a chain scored exactly during generation
	inc struct {
		ok         bool
		c          cand
		err, score float64
	}
	incDist []float64
	err     error // model failure during generation
	memo    pairMemo
	pb      PairBatcher // the graph's batch look-up, or nil
	pend    struct {    // pairs queued for fetch
		lo, hi []graphidx.EntityID
		ps     []graphidx.PairStats
		ok     []bool
	}
	pendMax int
	names   []byte // bridge names read by NameAppender (newResultBlock)
	// rankPrefix is the graph's RankPrefix (ranked lists shorter than it
	// are whole), or 0 when unknown.
	rankPrefix int
	touched    uint32 // sink of fetch's table touches

	// per call
	u      int
	dirErr float64
	g      Graph
	model  scorer.Model
	st     *settings
	s, t   graphidx.EntityID
	hb     float64
	bud    budget
	kCut   bool // the candidate heap overflowed or pruned
}

// newScratch returns a scratch whose scorer workspace lends Dist
// (scorer.Workspace.BorrowDist): every estimate's Dist is read or copied
// into the scratch's own buffers (ddist, incDist, dist) before the next
// model call, so the exact scores allocate nothing.
func newScratch() *scratch {
	ws := scorer.NewWorkspace()
	ws.BorrowDist(true)
	ws.DeferSeparation(deferSeparation) // resolved by chainScore
	return &scratch{ws: ws}
}

func (sc *scratch) reset() {
	sc.g, sc.model, sc.st, sc.pb = nil, nil, nil, nil
	clear(sc.rks[:cap(sc.rks)]) // drop references into the index
	sc.kCut = false
	sc.bud = budget{}
	sc.inc.ok = false
	sc.err = nil
	sc.ref = nil
	sc.memo.clear() // drop references into the index
}

// edge returns the proxy cost of the pair (a, b); ok is false when the pair
// has no statistics or the budget is out. The pair is read in ascending id
// order, so an edge costs the same whichever way a path crosses it (a chain
// met from both sides must cost the same to be kept once).
func (sc *scratch) edge(a, b graphidx.EntityID) (float64, bool) {
	if sc.bud.take(lookupUnits) < lookupUnits {
		return 0, false
	}
	if a > b {
		a, b = b, a
	}
	e := sc.memo.get(sc.g, a, b)
	if !e.ok {
		return 0, false
	}
	if c := e.cost; c == c { // not NaN: computed before
		return c, true
	}
	e.cost = sc.model.EdgeCost(e.ps)
	return e.cost, true
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

// push offers a candidate to the bounded max-heap of the k cheapest. When
// dup is set, a candidate already in the heap (the same chain met from the
// other direction) is dropped; the caller sets it only for a chain that
// may have been pushed before, so the O(k) scan runs rarely.
func (sc *scratch) push(c cand, dup bool) {
	h := sc.heap
	k := sc.st.maxCand
	if len(h) == k && c.cost > h[0].cost {
		sc.kCut = true
		return
	}
	if dup {
		for i := range h {
			if h[i].cost == c.cost && h[i].m == c.m && h[i].b == c.b {
				return // the same chain from the other direction
			}
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

// layer1 fills out with the beam of the B best-ranked neighbours of from
// (other excluded), by support; the edge cost is looked up only when a join
// uses the node. complete reports that it holds all of them.
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
		if len(out) == sc.st.beam || sc.bud.take(1) == 0 {
			break
		}
		out = append(out, step1{id: x, cost: math.NaN()})
	}
	return out, len(out) == eligible
}

// cost1 returns the edge cost origin → l[i].id, looking it up once.
func (sc *scratch) cost1(l []step1, i int32, origin graphidx.EntityID) (float64, bool) {
	if c := l[i].cost; c == c {
		return c, true
	}
	c, ok := sc.edge(origin, l[i].id)
	if ok {
		l[i].cost = c
	}
	return c, ok
}

// known is x, or 0 while x is still unknown (NaN): a lower bound of a cost.
func known(x float64) float64 {
	if x != x {
		return 0
	}
	return x
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

// layer2 extends l1 (rooted at from) into up to B two-hop paths
// from → a → b with b ∉ {from, other, a}, breadth-first by rank: the
// best-ranked remaining neighbour of every l1 node in l1's rank order, then
// the second-best, and so on. No pair is looked up here: the edge cost of
// a → b is filled in (edgeCost2) only when a join needs it.
func (sc *scratch) layer2(out []step2, l1 []step1, l1complete bool, from, other graphidx.EntityID) ([]step2, bool) {
	out = out[:0]
	complete := l1complete
	if cap(sc.cursor) < len(l1) {
		sc.cursor = make([]int32, len(l1))
	}
	cur := sc.cursor[:len(l1)]
	rks := sc.rks[:0]
	for i, x := range l1 {
		cur[i] = 0
		rk := sc.g.RankedNeighbors(x.id)
		rks = append(rks, rk)
		// Only a prefix is ranked? A list shorter than the graph's rank
		// prefix is whole, which spares reading the node's offsets.
		if complete && (sc.rankPrefix <= 0 || len(rk) >= sc.rankPrefix) && len(rk) < len(sc.g.Neighbors(x.id)) {
			complete = false
		}
	}
	sc.rks = rks
	// Read the head of every ranked list in one tight loop first: the
	// loads are independent, so their cache misses overlap, where the
	// breadth-first loop below (branchy, one list after the other) would
	// meet them one by one.
	var touch graphidx.EntityID
	for _, rk := range rks {
		if len(rk) > 0 {
			touch += rk[0]
		}
	}
	sc.touched += uint32(touch)
	for progress := true; progress; {
		progress = false
		for i, x := range l1 {
			if cur[i] < 0 {
				continue
			}
			rk := rks[i]
			pos := nextEligible(rk, int(cur[i]), from, other, x.id)
			if pos < 0 {
				cur[i] = -1
				continue
			}
			if len(out) == sc.st.beam {
				return out, false
			}
			if sc.bud.take(1) == 0 {
				return out, false
			}
			out = append(out, step2{a: x.id, b: rk[pos], li: int32(i), c2: math.NaN()})
			cur[i] = int32(pos + 1)
			progress = true
		}
	}
	return out, complete
}

// edgeCost2 returns the cost of p's second edge, looking it up once.
func (sc *scratch) edgeCost2(p *step2) (float64, bool) {
	if p.c2 == p.c2 { // not NaN
		return p.c2, true
	}
	c, ok := sc.edge(p.a, p.b)
	if !ok {
		return 0, false
	}
	p.c2 = c
	return c, true
}

// searchResult is the outcome of generate.
type searchResult struct {
	truncated bool
	deadline  bool
	cut       Cut
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
	complete := true

	// m = 1: N(s) ∩ N(t), exact. The phase may spend half the budget, the
	// intersection itself half of that, so that the hits can be scored and
	// the beams still run when a hub makes the intersection long.
	held := sc.bud.limit(sc.bud.left / 2)
	held2 := sc.bud.limit(sc.bud.left / 2)
	if !sc.intersect(g.Neighbors(s), g.Neighbors(t)) {
		complete = false
	}
	sc.bud.unlimit(held2)
	if sc.beginPrefetch(sc.bud.left/lookupUnits + 1) {
		for _, z := range sc.hits {
			if z != s && z != t {
				sc.want(s, z)
				sc.want(z, t)
			}
		}
		sc.fetch()
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
		sc.push(cand{cost: c1 + c2 + hb, b: [3]graphidx.EntityID{z}, m: 1}, false)
	}
	sc.bud.unlimit(held)
	if H == 1 {
		return sc.result(complete)
	}

	// Incumbent: with the reference known (the direct estimate), score the
	// proxy-best one-bridge chain exactly. Longer chains have score ≤
	// bound(m) (Err ≥ β·m); a phase whose bound cannot beat the incumbent is
	// skipped, which loses nothing, so it is no cut. Without direct support
	// the reference needs every phase's candidates, so none is skipped.
	if sc.ref != nil && len(sc.heap) > 0 {
		bi := 0
		for i := range sc.heap {
			if candLess(&sc.heap[i], &sc.heap[bi]) {
				bi = i
			}
		}
		if !sc.scoreIncumbent(sc.heap[bi]) {
			return sc.result(complete)
		}
		if sc.bound(2) <= sc.inc.score {
			return sc.result(complete)
		}
	}

	// Beams from both ends.
	var f1ok, t1ok, f2ok, t2ok bool
	sc.f1, f1ok = sc.layer1(sc.f1, s, t, adjacent)
	sc.t1, t1ok = sc.layer1(sc.t1, t, s, adjacent)
	sc.f2, f2ok = sc.layer2(sc.f2, sc.f1, f1ok, s, t)
	sc.t2, t2ok = sc.layer2(sc.t2, sc.t1, t1ok, t, s)
	skip3 := H < 3 || (sc.inc.ok && sc.bound(3) <= sc.inc.score)
	sc.matchJoins(skip3)
	sc.prefetchJoins()

	// m = 2: F2 ⋈ T1 (s→a→b, b→t) and F1 ⋈ T2 (s→b, t→c→b). Costs are
	// summed in path order so a chain met by both joins costs the same.
	f1, t1, f2, t2 := sc.f1, sc.t1, sc.f2, sc.t2
	for _, k := range sc.joinA {
		f := &f2[uint32(k)]
		yi, _ := sc.t1ids.get(uint64(f.b))
		if sc.prune(known(f1[f.li].cost) + known(f.c2) + known(t1[yi].cost) + 2*hb) {
			continue
		}
		c1, ok1 := sc.cost1(f1, f.li, s)
		c2, ok2 := sc.edgeCost2(f)
		c3, ok3 := sc.cost1(t1, yi, t)
		if ok1 && ok2 && ok3 {
			sc.push(cand{cost: c1 + c2 + c3 + 2*hb, b: [3]graphidx.EntityID{f.a, f.b}, m: 2}, false)
		}
	}
	for _, k := range sc.joinB {
		y := &t2[uint32(k)]
		xi, _ := sc.f1ids.get(uint64(y.b))
		x := f1[xi].id
		// path order: s→b (f1), b→c (y.c2), c→t (t1)
		if sc.prune(known(f1[xi].cost) + known(y.c2) + known(t1[y.li].cost) + 2*hb) {
			continue
		}
		c1, ok1 := sc.cost1(f1, xi, s)
		c2, ok2 := sc.edgeCost2(y)
		c3, ok3 := sc.cost1(t1, y.li, t)
		if ok1 && ok2 && ok3 {
			sc.push(cand{cost: c1 + c2 + c3 + 2*hb, b: [3]graphidx.EntityID{x, y.a}, m: 2}, sc.inJoinA(x, y.a))
		}
	}
	complete = complete && ((f2ok && t1ok) || (f1ok && t2ok))
	if H == 2 {
		return sc.result(complete)
	}

	if skip3 {
		return sc.result(complete)
	}

	// m = 3: F2 ⋈ T2 on the middle node (s→a→b, t→c→b, a ≠ c).
	for _, mt := range sc.joinC {
		f, y := &f2[mt.f], &t2[mt.t]
		if f.a == y.a || sc.prune(known(f1[f.li].cost)+known(f.c2)+known(y.c2)+known(t1[y.li].cost)+3*hb) {
			continue
		}
		c1, ok1 := sc.cost1(f1, f.li, s)
		c2, ok2 := sc.edgeCost2(f)
		c3, ok3 := sc.edgeCost2(y)
		c4, ok4 := sc.cost1(t1, y.li, t)
		if ok1 && ok2 && ok3 && ok4 {
			sc.push(cand{cost: c1 + c2 + c3 + c4 + 3*hb, b: [3]graphidx.EntityID{f.a, f.b, y.a}, m: 3}, false)
		}
	}
	complete = complete && f2ok && t2ok
	return sc.result(complete)
}

// matchJoins lists the matches of the joins, in the order a sort-merge
// of the id-sorted beams meets them (the order the joins process them in,
// which decides heap ties and pruning): F2 ⋈ T1 by ascending (b, position
// in F2), F1 ⋈ T2 by ascending (b, position in T2), and, unless skip3,
// F2 ⋈ T2 by ascending (b, position in F2, position in T2). The matches
// are found by hashing the ids of one side (idIndex) and sorting only the
// matches, a few dozen per decision, instead of sorting all four beams and
// merging them (whose data-dependent branches mispredict about every
// other step). O(B) expected plus O(M·log M) for M matches.
func (sc *scratch) matchJoins(skip3 bool) {
	f1, t1, f2, t2 := sc.f1, sc.t1, sc.f2, sc.t2
	sc.f1ids.reset(len(f1))
	for i := range f1 {
		sc.f1ids.put(uint64(f1[i].id), int32(i))
	}
	sc.t1ids.reset(len(t1))
	for i := range t1 {
		sc.t1ids.put(uint64(t1[i].id), int32(i))
	}
	sc.joinA = sc.joinA[:0]
	for i := range f2 {
		if _, ok := sc.t1ids.get(uint64(f2[i].b)); ok {
			sc.joinA = append(sc.joinA, uint64(f2[i].b)<<32|uint64(i))
		}
	}
	slices.Sort(sc.joinA)
	sc.joinB = sc.joinB[:0]
	for i := range t2 {
		if _, ok := sc.f1ids.get(uint64(t2[i].b)); ok {
			sc.joinB = append(sc.joinB, uint64(t2[i].b)<<32|uint64(i))
		}
	}
	slices.Sort(sc.joinB)
	sc.joinC = sc.joinC[:0]
	if skip3 {
		return
	}
	// The F2 paths whose end T2 has, then the T2 paths whose end is one
	// of those (few, so their index is small), both sorted, then merged
	// group by group.
	sc.t2ends.reset(len(t2))
	for i := range t2 {
		sc.t2ends.put(uint64(t2[i].b), int32(i))
	}
	fk, tk := sc.keysF[:0], sc.keysT[:0]
	for i := range f2 {
		if _, ok := sc.t2ends.get(uint64(f2[i].b)); ok {
			fk = append(fk, uint64(f2[i].b)<<32|uint64(i))
		}
	}
	if len(fk) > 0 {
		sc.f2ends.reset(len(fk))
		for _, k := range fk {
			sc.f2ends.put(k>>32, 0)
		}
		for i := range t2 {
			if _, ok := sc.f2ends.get(uint64(t2[i].b)); ok {
				tk = append(tk, uint64(t2[i].b)<<32|uint64(i))
			}
		}
	}
	slices.Sort(fk)
	slices.Sort(tk)
	for i, j := 0, 0; i < len(fk) && j < len(tk); {
		b := fk[i] >> 32 // every end in fk is in tk and the other way round
		ie, je := i, j
		for ie < len(fk) && fk[ie]>>32 == b {
			ie++
		}
		for je < len(tk) && tk[je]>>32 == b {
			je++
		}
		for _, x := range fk[i:ie] {
			for _, y := range tk[j:je] {
				sc.joinC = append(sc.joinC, match3{f: uint32(x), t: uint32(y)})
			}
		}
		i, j = ie, je
	}
	sc.keysF, sc.keysT = fk, tk
}

// inJoinA reports whether F2 ⋈ T1 met the chain s→x→c→t, i.e. whether F2
// has the path s→x→c with c in T1: a binary search for c in the sorted
// matches of F2 ⋈ T1 (a few per decision). Only such a chain can be pushed
// twice.
func (sc *scratch) inJoinA(x, c graphidx.EntityID) bool {
	j, _ := slices.BinarySearch(sc.joinA, uint64(c)<<32)
	for ; j < len(sc.joinA) && sc.joinA[j]>>32 == uint64(c); j++ {
		if sc.f2[uint32(sc.joinA[j])].a == x {
			return true
		}
	}
	return false
}

// match3 is a match of F2 ⋈ T2: positions in F2 and T2.
type match3 struct{ f, t uint32 }

// prefetchJoins queues and fetches the pairs the joins will read: every
// edge of every match (matchJoins).
func (sc *scratch) prefetchJoins() {
	if !sc.beginPrefetch(sc.bud.left/lookupUnits + 1) {
		return
	}
	s, t, f1, f2, t2 := sc.s, sc.t, sc.f1, sc.f2, sc.t2
	for _, k := range sc.joinA {
		f := &f2[uint32(k)]
		sc.want(s, f.a)
		sc.want(f.a, f.b)
		sc.want(f.b, t)
	}
	for _, k := range sc.joinB {
		y := &t2[uint32(k)]
		xi, _ := sc.f1ids.get(uint64(y.b))
		sc.want(s, f1[xi].id)
		sc.want(y.b, y.a)
		sc.want(y.a, t)
	}
	for _, mt := range sc.joinC {
		f, y := &f2[mt.f], &t2[mt.t]
		if f.a == y.a {
			continue
		}
		sc.want(s, f.a)
		sc.want(f.a, f.b)
		sc.want(f.b, y.a)
		sc.want(y.a, t)
	}
	sc.fetch()
}

func (sc *scratch) result(complete bool) searchResult {
	var cut Cut
	if sc.kCut {
		cut |= CutCandidates
	}
	if sc.bud.deadline {
		cut |= CutDeadline
	} else if sc.bud.exhausted {
		cut |= CutBudget
	}
	if !complete && !sc.bud.exhausted {
		cut |= CutBeam
	}
	return searchResult{
		truncated: !complete || sc.kCut || sc.bud.exhausted,
		deadline:  sc.bud.deadline,
		cut:       cut,
	}
}

// candCmp orders candidates by hops, then ascending proxy cost, then ids.
func candCmp(a, b cand) int {
	if c := cmp.Compare(a.m, b.m); c != 0 {
		return c
	}
	if c := cmp.Compare(a.cost, b.cost); c != 0 {
		return c
	}
	for i := 0; i < int(a.m); i++ {
		if c := cmp.Compare(a.b[i], b.b[i]); c != 0 {
			return c
		}
	}
	return 0
}

func candLess(a, b *cand) bool { return candCmp(*a, *b) < 0 }

// sortCands orders the heap by candCmp: short chains are scored first,
// which lets the β·m bound skip long ones.
func (sc *scratch) sortCands() { slices.SortFunc(sc.heap, candCmp) }

// scoreOf is the routing score of a chain with the given gain and hops.
func (sc *scratch) scoreOf(gain float64, m int) float64 {
	if sc.st.utility {
		return sc.st.lambda*gain - sc.st.hopCost*float64(m)
	}
	return gain
}

// bound is the largest score a chain of m bridges can have: its Err is at
// least β·m, so its gain at most E_direct − β·m.
func (sc *scratch) bound(m int) float64 { return sc.scoreOf(sc.dirErr-sc.hb*float64(m), m) }

// scoreIncumbent scores c exactly, with its bias relative to sc.ref (or as
// the reference itself when sc.ref is nil: bias 0, and sc.ref becomes its
// estimate), and records it as the incumbent. It returns false (with sc.err
// set) when the model fails.
func (sc *scratch) scoreIncumbent(c cand) bool {
	sc.path = append(sc.path[:0], c.b[:c.m]...)
	est, err := sc.model.Chain(sc.ws, sc, sc.s, sc.u, sc.path, sc.t)
	if err != nil {
		sc.err = err
		return false
	}
	e, score, err := sc.chainScore(est, int(c.m), nil)
	if err != nil {
		sc.err = err
		return false
	}
	sc.inc.ok, sc.inc.c = true, c
	sc.inc.err, sc.inc.score = e, score
	sc.incDist = append(sc.incDist[:0], est.Dist...)
	if sc.ref == nil {
		sc.ref, sc.refVar = sc.incDist, est.Var
	}
	return true
}

// refCmp orders candidates for the choice of the reference chain: by proxy
// cost, then hops, then ids.
func refCmp(a, b *cand) int {
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
}

// refCand returns the index in sc.heap of the proxy-cheapest candidate
// (refCmp), or -1 for an empty heap.
func (sc *scratch) refCand() int {
	ri := -1
	for i := range sc.heap {
		if ri < 0 || refCmp(&sc.heap[i], &sc.heap[ri]) < 0 {
			ri = i
		}
	}
	return ri
}
