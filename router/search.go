package router

import (
	"cmp"
	"math"
	"math/bits"
	"slices"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// Bridge search (docs/SEARCH.md; overview in docs/DESIGN.md, Bridge search).
//
// A chain with m bridges is s=b0 → b1 → … → bm → t=b(m+1).
//
//   - m = 1: every b1 ∈ N(s) ∩ N(t), by a merge of the two id-sorted
//     adjacency lists, or a galloping search when one is more than 32×
//     longer. This phase may spend half the budget (the intersection half
//     of that), so a hub leaves room for the rest.
//   - m = 2, 3: meet in the middle. Layers grow from both ends: F1 (T1)
//     holds the B best-ranked (highest-support) neighbours of s (t), read in
//     order from the support-ranked adjacency prefix and, when B reaches past
//     the index's rank prefix, from the full adjacency (beyond); F2 (T2)
//     extends every F1 (T1) node by its f best-ranked neighbours (f = the
//     fan-out), so it holds at most B·f two-hop paths. The halves are joined
//     on shared nodes (hash joins, matchJoins): m = 2 from F2 ⋈ T1
//     (s→a→b, b→t) and F1 ⋈ T2 (s→a, t→c→a) over the whole layers; m = 3
//     from F2 ⋈ T2 (s→a→b, t→c→b, a ≠ c) over the B best-ranked paths of
//     each side (beam3), since its matches grow with the product of the
//     two layers.
//
// Stage 1 ranks the generated chains by the additive proxy
// Σ_edges model.EdgeCost(pair stats) + model.HopBias()·m and keeps the k
// cheapest in a bounded max-heap (a chain met from both sides is kept once).
// For the Bayes model EdgeCost is a signal-loss cost (−log of a lower bound
// of Cramér's V), so the cheapest chains are those that keep the most
// signal; it is not monotone in support. The layers are still
// support-ranked: support bounds how well an edge is known, and a layer
// that could not hold every neighbour marks the search cut (CutBeam), so a
// cheap edge of low rank is never silently lost. The join matches are
// turned into chains cheapest lower bound first (joinAll), so the heap
// bound prunes most of them before their middle edges are looked up.
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
// bridges, then smaller ids), whose own bias term is 0, projected by the
// model onto the ball its bound allows (scorer.ReferenceProjector): a
// reference the bound shows to be biased would charge the chains that
// disagree with it. It picks the largest
// score: the gain E_direct − Err_c, or λ·gain − c_hop·m. Candidates are
// scored shortest first, and one whose bound (Err_c ≥ β·m_c, so score ≤
// bound(m)) cannot beat the best so far is skipped. When ref is the direct
// estimate it is known before generation, and generation itself scores the
// proxy-best one-bridge chain and skips the two- and three-bridge phases
// whose bound cannot beat it. Without direct support the reference depends
// on every generated chain, so all phases are generated (only exact scoring
// is skipped).
//
// Cost: O(I + B·f + M·log M + k·C) plus the pair look-ups. I is the
// intersection, O(|a|+|b|) by merge or O(|a|·log(|b|/|a|)) by galloping.
// The layers are read from the ranked lists without look-ups and joined by
// hashing (expected O(B·f)); the M matches are sorted by their lower
// bound. An edge cost (O(K²): Cramér's V of the pair table) is computed
// once, only for an edge of a match that the heap bound did not prune. C is
// one exact chain score (O(m·K³)). List steps cost 1 budget unit and
// look-ups lookupUnits, so a hub with millions of neighbours costs at most
// the budget; the context's deadline is polled every 256 units.
//
// Every pair is read from the graph once per decision (pairMemo; stage 2
// and the direct estimate read the memo too). When the graph implements
// PairBatcher, the pairs of the one-bridge phase, the end edges of the
// joins and the middle edges of each chunk of matches are fetched in one
// batch each (fetch), so that their cache misses overlap; the phase then
// finds them in the memo. When it also implements RankedPairBatcher (or
// HintedPairBatcher), the end and middle edges, all reached through ranked
// lists, are named by their ranked entry (or carry the stored position of
// their pair), which spares each its binary search. The budget is charged per edge by the phase
// exactly as without the batch, so no decision changes; a batch holds at
// most the look-ups the remaining budget allows, so a decision's graph
// look-ups stay below twice the budget's.
//
// Completeness (what Decision.Truncated and Cut mean): the result is the
// exact optimum of the rule above over all simple chains of at most H
// bridges whenever Truncated is false. A cut is recorded only when a bound
// left out something that could have won:
//
//   - CutBeam: a layer could not hold every eligible neighbour (B for the
//     first layer, f per node for the second, B paths per side for the
//     three-bridge join) and the phases that need it were not covered by
//     the other side: m = 2 needs (F2 and T1) or (F1 and T2) whole, m = 3
//     needs F2 and T2 whole and at most B paths each. A layer cut only by
//     the budget is reported as CutBudget instead.
//   - CutCandidates: a generated chain (or a pruned partial path) of m
//     bridges was left out of the k candidates and its bound could beat
//     the chosen chain: bound(m) > best score, or no chain was scored
//     (candidatesCut). Chains that could not have won are no cut.
//   - CutBudget: the expansion budget (or the one-bridge phase's share of
//     it) ran out before a phase finished.
//   - CutDeadline: the context was done; the decision is not cached.
//
// Then every chain is generated or provably beaten, so the reference is
// the global proxy minimum and every chain is either scored or provably
// beaten. The pruning rules need only EdgeCost ≥ 0 (a partial sum of edge
// costs, unknown costs counted as 0, bounds a chain's proxy cost from
// below) and Err_c ≥ HopBias()·m (stage-2 and phase bounds; the variance
// and bias terms are ≥ 0). No rule assumes EdgeCost is monotone in
// support.

// step1 is a first-layer beam node; cost is its edge cost from the origin,
// NaN until a join needs it (cost1).
type step1 struct {
	id   graphidx.EntityID
	ent  uint32 // position of id in the origin's ranked list, graphidx.NoPairHint if beyond it
	cost float64
}

// step2 is a two-hop beam path origin → a → b, a being the first-layer
// node at position li (its id is the layer's l1[li].id). It is 12 bytes: a
// second layer holds up to B·f of them, written afresh by every decision.
// The cost of a → b, once a join computes it, is kept aside (edgeCost2).
type step2 struct {
	b  graphidx.EntityID
	li int32
	r  int32 // position of b among a's eligible neighbours (rank order)
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

// pollEvery is how many items a loop that charges no budget (reading the
// lists of a hub-sized layer) handles between two deadline polls.
const pollEvery = 1024

// poll reports whether the deadline has fired, recording it as take does,
// without charging anything; for loops whose work the budget does not
// count, so that a search cut by the deadline is the same search whatever
// the loop. O(1).
func (b *budget) poll() bool {
	if b.done == nil || b.deadline {
		return b.deadline
	}
	select {
	case <-b.done:
		b.deadline = true
		b.exhausted = true
		b.left = 0
		return true
	default:
		return false
	}
}

// scratch is per-call working memory, pooled per router.
type scratch struct {
	ws     *scorer.Workspace
	f1, t1 []step1
	f2, t2 []step2
	// join matches (matchJoins)
	f1ids, t1ids   idIndex  // layer-1 node → position
	f1f, t1f       idFilter // the ids of f1ids, t1ids
	joinFilt       bool     // the probes test f1f, t1f (indexFirstLayers)
	rkSet          idIndex  // a ranked prefix (beyond)
	extra, extra2  []graphidx.EntityID
	sups           []uint64
	ord            []int32
	jms            []jmatch
	jchunk         []jmatch // the matches of one join chunk, popped from jms
	rcount         []int
	f2ends, t2ends idIndex // layer-2 end nodes met by both sides (f2ends), of T2
	// c2: the costs of second-layer paths' second edges (edgeCost2),
	// per side and path, valid where stamp equals epoch.
	c2 struct {
		epoch uint32
		stamp [2][]uint32
		val   [2][]float64
	}
	joinA, joinB []jpair // F2 ⋈ T1 (A), F1 ⋈ T2 (B)
	joinC        []match3
	endF, endT   []bool // first-layer nodes whose end edge is queued (joinAll)
	liveF, liveT []bool // first-layer nodes extended by layer2 (liveNodes)
	// nF2, nT2: the second-layer paths of each first-layer node, counted
	// also for the nodes liveNodes leaves out (beam3); totF2, totT2 their
	// sums.
	nF2, nT2 []int32
	// starts: where each first-layer node's paths begin in F2 (side 0)
	// and T2 (side 1), for the nodes layer2 reached; beamF, beamT the
	// positions of the three-bridge beam's paths (beamPaths).
	starts       [2][]int32
	beamF, beamT []int32
	totF2, totT2 int
	keysF, keysT []uint64
	rks          [2][][]graphidx.EntityID // ranked lists of the layer-1 nodes, s side and t side
	hks          [2][][]uint32            // their pair hints (HintedPairBatcher without RankedPairBatcher), nil entries without
	h1           [2][]uint32              // the same for the ranked lists of s and t (layer1)
	heap         []cand
	hits         []graphidx.EntityID
	path         []graphidx.EntityID
	dist         []float64 // best chain's Dist copy
	ddist        []float64 // direct Dist copy
	// ref is the reference estimate of the bias term (ddist, or incDist of
	// the reference chain); nil until known. refVar is its variance part
	// (scorer.Estimate.Var), for the gain margin (chainScore). refBuf
	// holds a reference chain's estimate projected by the model
	// (scorer.ReferenceProjector).
	ref, refBuf []float64
	refVar      float64
	// refChain: the reference is the estimate of the chain refC (for the
	// parallel answer, parallel.go).
	refChain bool
	refC     cand
	// incWit and bestWit: the separation witnesses of the incumbent and
	// of the best chain (scorer.Workspace.SeparationWitnesses), for the
	// parallel answer (parallel.go)
	incWit, bestWit []graphidx.EntityID
	// the parallel answer of the decision (parallel.go)
	parCand cand
	parDist []float64
	parSup  uint64
	parMid  bool // parDist is the midpoint with the best one-bridge chain

	// incumbent: a chain scored exactly during generation
	inc struct {
		ok         bool
		c          cand
		err, score float64
		sep        float64 // its part of lastSep
	}
	// lastSep: the separation bias that the last chainScore call charged
	// and that witnesses on the observed side account for (shrink.go);
	// bestSep: that of the best chain.
	lastSep, bestSep float64

	incDist []float64
	err     error // model failure during generation
	memo    pairMemo
	pb      PairBatcher           // the graph's batch look-up, or nil
	hp      HintedPairBatcher     // the graph's hinted batch look-up, or nil
	rb      RankedPairBatcher     // the graph's ranked batch look-up, or nil
	rpf     RankedPrefetcher      // the graph's ranked-list prefetch, or nil
	rtp     RankedTablePrefetcher // the graph's table-reference prefetch, or nil
	pend    struct {              // pairs queued for fetch
		a, b []graphidx.EntityID // the pairs, owner first when ent names an entry of its ranked list
		ent  []uint32            // ranked-list entries (RankedPairBatcher), graphidx.NoPairHint when none
		hint []uint32            // stored pair positions (HintedPairBatcher), graphidx.NoPairHint when unknown
		ps   []graphidx.PairStats
		ok   []bool
	}
	pendMax int
	names   []byte // bridge names read by NameAppender (newResultBlock)
	// nbrS, nbrT: the adjacency lists of s and t when short (endLists),
	// else nil.
	nbrS, nbrT []graphidx.EntityID
	// rkS, rkT: the ranked lists of s and t when whole and at most
	// endRankMax long, for endEntry (graphs with PairBatchRanked), else
	// nil.
	rkS, rkT []graphidx.EntityID
	// one: the arguments of a single ranked look-up (rankedPair), kept
	// here so that passing them to the graph allocates nothing.
	one struct {
		a, b [1]graphidx.EntityID
		ent  [1]uint32
		ps   [1]graphidx.PairStats
		ok   [1]bool
	}
	// rankPrefix is the graph's RankPrefix (ranked lists shorter than it
	// are whole), or 0 when unknown.
	rankPrefix int
	touched    uint32 // sink of the touch loops' reads (layer2, touchLayerLists)
	// alt runs the alternative code path kept for a one-process A/B
	// comparison (searchHooks.alt; tests only).
	alt bool
	// ends holds s and t for the RankedTablePrefetcher calls.
	ends [2]graphidx.EntityID

	// per call
	u      int
	dirErr float64
	g      Graph
	model  scorer.Model
	bayes  *scorer.Bayes // model, when it is the Bayes model (edgeCost)
	st     *settings
	s, t   graphidx.EntityID
	hb     float64
	bud    budget
	// dropped has bit m set when a chain of m bridges was left out of
	// the candidates (drop).
	dropped uint8
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
	sc.g, sc.model, sc.bayes, sc.st, sc.pb, sc.hp, sc.rb, sc.rpf, sc.rtp = nil, nil, nil, nil, nil, nil, nil, nil, nil
	sc.h1 = [2][]uint32{}
	for side := range sc.rks { // drop references into the index
		clear(sc.rks[side][:cap(sc.rks[side])])
		clear(sc.hks[side][:cap(sc.hks[side])])
	}
	sc.dropped = 0
	sc.bud = budget{}
	sc.inc.ok = false
	sc.err = nil
	sc.ref, sc.refChain = nil, false
	sc.memo.clear() // drop references into the index
	sc.nbrS, sc.nbrT = nil, nil
	sc.rkS, sc.rkT = nil, nil
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
	e := sc.memoGet(a, b)
	if !e.ok {
		return 0, false
	}
	if c := e.cost; c == c { // not NaN: computed before
		return c, true
	}
	return sc.edgeCost(e), true
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
	// Step at most as far as the budget allows, then charge the steps
	// taken: a merge that ends early (one list exhausted) within the
	// budget is complete and no cut, however long the other list is.
	avail := min(len(a)+len(b), max(sc.bud.left, 0))
	i, j, n := 0, 0, 0
	for ; n < avail && i < len(a) && j < len(b); n++ {
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
	sc.bud.take(n)
	if i == len(a) || j == len(b) {
		return true
	}
	sc.bud.exhausted = true
	return false
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
		sc.drop(int(c.m))
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
	if c.cost == h[0].cost {
		sc.drop(int(c.m))
		return // keep the earlier of equal-cost candidates
	}
	sc.drop(int(h[0].m))
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

// prune reports whether a chain of m bridges whose proxy cost is at least
// lower can no longer enter the heap; it records the drop.
func (sc *scratch) prune(lower float64, m int) bool {
	if len(sc.heap) == sc.st.maxCand && lower >= sc.heap[0].cost {
		sc.drop(m)
		return true
	}
	return false
}

// drop records that a chain of m bridges was generated (or pruned as a
// partial path) but left out of the k candidates. Whether that is a cut is
// decided after the exact scores (candidatesCut).
func (sc *scratch) drop(m int) { sc.dropped |= 1 << m }

// oneChunk is the number of one-bridge hits whose second edges are
// fetched in one batch (fetchSecond).
const oneChunk = 16

// fetchSecond fetches, in one batch, the second edges z → t of the hits
// from position i on, up to oneChunk of them, except those whose first
// edge s → z already lets the heap bound prune the chain (the bound only
// tightens, so they are pruned when their turn comes; their first edges
// were fetched before). It returns the position after the chunk. The
// budget is charged by the phase as without it.
func (sc *scratch) fetchSecond(i int) int {
	end := min(len(sc.hits), i+oneChunk)
	if sc.bud.left < lookupUnits || !sc.beginPrefetch(sc.bud.left/lookupUnits+1) {
		// The phase can look nothing more up (a hub's hits outlast
		// the budget): no more batches.
		return len(sc.hits)
	}
	for _, z := range sc.hits[i:end] {
		if z == sc.s || z == sc.t {
			continue
		}
		if c, ok := sc.peekCost(sc.s, z); ok && sc.prunable(c+sc.hb) {
			continue
		}
		sc.want(z, sc.t)
	}
	sc.fetch()
	return end
}

// peekCost returns the edge cost of the pair (a, b) when the memo holds
// it, computing the cost if needed, without charging the budget (the phase
// charges it when it uses the edge). O(1) expected plus one EdgeCost.
func (sc *scratch) peekCost(a, b graphidx.EntityID) (float64, bool) {
	if a > b {
		a, b = b, a
	}
	if len(sc.memo.tab) == 0 {
		return 0, false
	}
	i, found := sc.memo.find(uint64(a)<<32 | uint64(b))
	if !found || !sc.memo.tab[i].ok {
		return 0, false
	}
	e := &sc.memo.tab[i]
	if e.cost != e.cost {
		sc.edgeCost(e)
	}
	return e.cost, true
}

// prunable reports whether a chain whose proxy cost is at least lower can
// no longer enter the heap (as prune, without recording a drop). O(1).
func (sc *scratch) prunable(lower float64) bool {
	return len(sc.heap) == sc.st.maxCand && lower >= sc.heap[0].cost
}

// layer1 fills out with the first-layer beam of from: its B best-ranked
// neighbours by support (other excluded), read from the support-ranked
// prefix and, when the beam reaches past the prefix, from the full
// adjacency (ranked). The edge cost is looked up only when a join uses the
// node. ok reports that it holds every eligible neighbour; beamCut that
// the width B (not the budget) left some out.
func (sc *scratch) layer1(out []step1, from, other graphidx.EntityID) (l []step1, ok, beamCut bool) {
	out = out[:0]
	rk := sc.g.RankedNeighbors(from)
	hints := sc.rankedHints(from, len(rk))
	side := 0
	if from != sc.s {
		side = 1
	}
	sc.h1[side] = hints
	for j, x := range rk {
		if x == other || x == from {
			continue
		}
		if len(out) == sc.st.beam {
			return out, false, true
		}
		if sc.bud.take(1) == 0 {
			return out, false, false
		}
		out = append(out, step1{id: x, ent: uint32(j), cost: math.NaN()})
	}
	if sc.whole(from, rk) {
		return out, true, false
	}
	extra, ok, beamCut := sc.beyond(from, rk, sc.st.beam-len(out), from, other, from)
	for _, x := range extra {
		out = append(out, step1{id: x, ent: graphidx.NoPairHint, cost: math.NaN()})
	}
	return out, ok, beamCut
}

// whole reports whether rk, the ranked list of x, holds every neighbour of
// x: a list shorter than the graph's rank prefix is whole, which spares
// reading x's offsets; otherwise the lengths are compared. O(1).
func (sc *scratch) whole(x graphidx.EntityID, rk []graphidx.EntityID) bool {
	if sc.rankPrefix > 0 && len(rk) < sc.rankPrefix {
		return true
	}
	return len(rk) >= len(sc.g.Neighbors(x))
}

// beyond returns, best first, up to room neighbours of x that its ranked
// prefix rk does not hold, other than ex0, ex1, ex2: all of them (in id
// order) when they fit, else the room best by (support descending, id
// ascending), which costs one pair look-up each. It is how a beam wider
// than the index's rank prefix goes on past the prefix. ok reports that
// every such neighbour was returned; beamCut that room (not the budget)
// left some out. Cost O(deg(x)) list steps, plus O(deg(x)) look-ups and a
// sort when they do not fit; the returned slice is scratch memory valid
// until the next call.
func (sc *scratch) beyond(x graphidx.EntityID, rk []graphidx.EntityID, room int, ex0, ex1, ex2 graphidx.EntityID) (extra []graphidx.EntityID, ok, beamCut bool) {
	if room <= 0 {
		// Nothing more fits: the rest is cut, whatever it holds (the
		// caller knows the list is not whole).
		return nil, false, true
	}
	all := sc.g.Neighbors(x)
	if sc.bud.take(len(all)) < len(all) {
		return nil, false, false
	}
	sc.rkSet.reset(len(rk))
	for i, y := range rk {
		sc.rkSet.put(uint64(y), int32(i))
	}
	rest := sc.extra[:0]
	for i, y := range all {
		if i%pollEvery == pollEvery-1 && sc.bud.poll() {
			sc.extra = rest
			return nil, false, false // the deadline fired (charged above)
		}
		if y == ex0 || y == ex1 || y == ex2 {
			continue
		}
		if _, in := sc.rkSet.get(uint64(y)); !in {
			rest = append(rest, y)
		}
	}
	sc.extra = rest
	if len(rest) <= room {
		return rest, true, false
	}
	// Rank the rest by support: one look-up each, all or nothing.
	if sc.bud.left < len(rest)*lookupUnits {
		sc.bud.take(sc.bud.left + 1) // records the exhaustion
		return nil, false, false
	}
	// The look-ups in one batch (their misses overlap; fetch caps the
	// batch), each still charged below. Charged per look-up, so the
	// deadline is polled every deadlinePoll units: a hub's rest can be
	// hundreds of thousands of look-ups.
	if sc.beginPrefetch(len(rest)) {
		for _, y := range rest {
			sc.want(x, y)
		}
		sc.fetch()
	}
	sups := sc.sups[:0]
	for _, y := range rest {
		if sc.bud.take(lookupUnits) < lookupUnits {
			sc.sups = sups
			return nil, false, false // the deadline fired (the budget was checked above)
		}
		ps, _ := sc.pairStats(x, y)
		sups = append(sups, ps.Support())
	}
	sc.sups = sups
	better := func(i, j int32) int { // support descending, then id
		if c := cmp.Compare(sups[j], sups[i]); c != 0 {
			return c
		}
		return cmp.Compare(rest[i], rest[j])
	}
	ord := sc.ord[:0]
	if room <= smallRoom {
		// The room best by insertion into a sorted run: O(len·room).
		for i := range rest {
			j := len(ord)
			if j == room && better(int32(i), ord[j-1]) >= 0 {
				continue
			}
			if j < room {
				ord = append(ord, 0)
			} else {
				j--
			}
			for ; j > 0 && better(int32(i), ord[j-1]) < 0; j-- {
				ord[j] = ord[j-1]
			}
			ord[j] = int32(i)
		}
	} else {
		for i := range rest {
			ord = append(ord, int32(i))
		}
		slices.SortFunc(ord, better)
	}
	sc.ord = ord
	best := sc.extra2[:0]
	for _, i := range ord[:room] {
		best = append(best, rest[i])
	}
	sc.extra2 = best
	return best, false, true
}

// smallRoom is the largest room that beyond fills by insertion instead of
// sorting every candidate.
const smallRoom = 8

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

// layer2 extends l1 (rooted at from) into two-hop paths from → a → b with
// b ∉ {from, other, a}: every first-layer node a by its f best-ranked
// neighbours (f = the fan-out), read from the ranked prefix and, when f
// reaches past it, from the full adjacency. So the layer holds at most
// |l1|·f paths. No pair is looked up here: the edge cost of a → b is
// filled in (edgeCost2) only when a join needs it. ok reports that every
// path of the kind is in the layer (l1ok and no node cut); beamCut that
// the fan-out (not the budget) left some out.
//
// counts receives the number of paths of every first-layer node, in
// order. A node that live (when not nil) marks false gets no paths, but
// its count and flags are what extending it would give; liveNodes admits
// that only when such a node's paths come from its ranked prefix alone
// (no beyond) and the budget cannot run out.
//
// side (0 for s, 1 for t) names where the nodes' ranked lists and pair
// hints are kept for the joins (want2).
//
// With probe set (indexFirstLayers has indexed both first layers), every
// path is probed in the other side's first layer as it is written, and a
// match is appended to the join list of its side (F2 ⋈ T1 to joinA, F1 ⋈
// T2 to joinB) in layer order, as matchJoins would list it after the layer
// is built. The probes are work without a cache miss; here they run while
// the loop waits for the ranked lists it reads, and the paths are not read
// a second time.
func (sc *scratch) layer2(out []step2, l1 []step1, l1ok bool, from, other graphidx.EntityID, live []bool, counts *[]int32, side int, probe bool) (l []step2, ok, beamCut bool) {
	out = out[:0]
	ok = l1ok
	f := sc.st.fanOut
	cnt := (*counts)[:0]
	starts := sc.starts[side][:0]
	// The other side's first layer (its index and filter) and this side's
	// join list, for probe.
	pix, pflt, joins := &sc.t1ids, &sc.t1f, sc.joinA
	if side == 1 {
		pix, pflt, joins = &sc.f1ids, &sc.f1f, sc.joinB
	}
	filt := sc.joinFilt
	defer func() {
		*counts, sc.starts[side] = cnt, starts
		if probe {
			// A node cut by the budget keeps only the paths it
			// could pay for: so do the matches.
			for len(joins) > 0 && int(uint32(joins[len(joins)-1].key)) >= len(out) {
				joins = joins[:len(joins)-1]
			}
			if side == 0 {
				sc.joinA = joins
			} else {
				sc.joinB = joins
			}
		}
	}()
	rks, hks := sc.rks[side][:0], sc.hks[side][:0]
	for i, x := range l1 {
		// A hub's first layer can hold 10⁵ nodes whose list offsets are
		// read here, uncharged (cold pages of the mapping on a first
		// call): poll the deadline.
		if i%pollEvery == pollEvery-1 && sc.bud.poll() {
			sc.rks[side], sc.hks[side] = rks, hks
			return out, false, beamCut
		}
		rk := sc.g.RankedNeighbors(x.id)
		rks = append(rks, rk)
		hks = append(hks, sc.rankedHints(x.id, len(rk)))
	}
	sc.rks[side], sc.hks[side] = rks, hks
	// Read the head of every ranked list in one tight loop first: the
	// loads are independent, so their cache misses overlap, where the
	// loop below (branchy, one list after the other) would meet them one
	// by one.
	// The last entry the loop can read (f paths plus the two ends) may
	// sit on the list's next cache line: touch it too.
	// The same for the pair hints the joins pass with the paths' edges.
	var touch graphidx.EntityID
	for i, rk := range rks {
		if len(rk) > 0 {
			touch += rk[0] + rk[min(len(rk), f+2)-1]
			if hk := hks[i]; hk != nil {
				touch += hk[0] + hk[min(len(hk), f+2)-1]
			}
		}
	}
	sc.touched += uint32(touch)
	for i, x := range l1 {
		starts = append(starts, int32(len(out)))
		rk := rks[i]
		n := 0
		full := false
		dead := live != nil && !live[i] // counted, not extended
		for _, y := range rk {
			if y == from || y == other || y == x.id {
				continue
			}
			if n == f {
				full = true
				break
			}
			if !dead {
				if probe && (!filt || pflt.has(uint64(y))) {
					if yi, hit := pix.get(uint64(y)); hit {
						joins = append(joins, jpair{key: uint64(y)<<32 | uint64(len(out)), end: yi})
					}
				}
				out = append(out, step2{b: y, li: int32(i), r: int32(n)})
			}
			n++
		}
		// One unit per path, charged for the node at once: when the
		// budget holds fewer, the node keeps that many paths and the
		// layer stops, as a unit-by-unit charge would.
		if got := sc.bud.take(n); !dead && got < n {
			out = out[:len(out)-(n-got)]
			cnt = append(cnt, int32(got))
			return out, false, beamCut
		}
		if dead {
			cnt = append(cnt, int32(n))
			// Not whole, the prefix gave f paths (liveNodes): beyond
			// would find no room, a fan-out cut.
			if full || !sc.whole(x.id, rk) {
				ok, beamCut = false, true
			}
			continue
		}
		if full {
			cnt = append(cnt, int32(n))
			ok, beamCut = false, true
			continue
		}
		if sc.whole(x.id, rk) {
			cnt = append(cnt, int32(n))
			continue
		}
		extra, eok, ecut := sc.beyond(x.id, rk, f-n, from, other, x.id)
		for _, y := range extra {
			if probe && (!filt || pflt.has(uint64(y))) {
				if yi, hit := pix.get(uint64(y)); hit {
					joins = append(joins, jpair{key: uint64(y)<<32 | uint64(len(out)), end: yi})
				}
			}
			out = append(out, step2{b: y, li: int32(i), r: int32(n)})
			n++
		}
		cnt = append(cnt, int32(n))
		if !eok {
			ok = false
			beamCut = beamCut || ecut
			if !ecut {
				return out, false, beamCut // the budget ran out
			}
		}
	}
	return out, ok, beamCut
}

// touchLayerLists reads the ranked-list offsets of the entities the first
// layers will hold (the heads of s's and t's ranked lists, B+2 of each)
// before the one-bridge phase, in one tight loop whose cache misses overlap,
// where layer1 and layer2 would meet them one part at a time. On the 1M-entity
// benchmark index: first and second layers −0.85 and −1.1 µs, the one-bridge
// phase +1.4 µs, about −1.5 µs per decision. An index of fewer than
// touchMinEntities entities has its offsets (8 bytes per entity) in cache
// and is left alone. With a RankedPrefetcher (the index) it reads the
// offsets (which prefetchLayerOffsets started loading before the direct
// estimate) and only starts loading the lists' heads, the first f+2 entries
// that layer2 reads, without waiting for them: they arrive while the
// one-bridge phase runs (on the 1M-entity benchmark index −0.64 µs per
// decision, docs/SEARCH.md, eighth round). With a RankedTablePrefetcher it
// also starts loading the count tables of the pairs named by the first
// B+2 entries of s's and t's lists (the end edges and the one-bridge
// pairs of s or t), whose references prefetchLayerOffsets started loading:
// about −0.45 µs per decision (tenth round). It charges nothing and
// changes no decision. O(B).
func (sc *scratch) touchLayerLists() {
	if sc.st.maxBridges < 2 || sc.g.NumEntities() < touchMinEntities {
		return
	}
	n := sc.st.beam + 2
	if sc.rpf != nil {
		for _, e := range [2]graphidx.EntityID{sc.s, sc.t} {
			rk := sc.g.RankedNeighbors(e)
			sc.rpf.PrefetchRankedHeads(rk[:min(len(rk), n)], sc.st.fanOut+2)
		}
		if sc.rtp != nil {
			sc.ends = [2]graphidx.EntityID{sc.s, sc.t}
			sc.rtp.PrefetchRankedCounts(sc.ends[:], n)
		}
		return
	}
	var touch int
	for _, e := range [2]graphidx.EntityID{sc.s, sc.t} {
		rk := sc.g.RankedNeighbors(e)
		for _, x := range rk[:min(len(rk), n)] {
			touch += len(sc.g.RankedNeighbors(x))
		}
	}
	sc.touched += uint32(touch)
}

// prefetchLayerOffsets starts loading the ranked-list offsets of the
// entities the first layers will hold (the heads of s's and t's ranked
// lists, B+2 of each) before the direct estimate, without waiting for
// them (RankedPrefetcher), so that they arrive while the direct estimate
// runs; touchLayerLists then finds them in cache. With a
// RankedTablePrefetcher (the index) it also starts loading the stored
// table references of those B+2 entries of s's and t's lists (9 or 10
// cache lines per list at B = 64), which the joins' end edges and the
// one-bridge phase's pairs of s or t are looked up by: on the
// 1M-entity benchmark index −1.0 to −1.3 µs per decision (docs/SEARCH.md,
// tenth round; the same for the first f+4 entries of every first-layer
// node's list, the middle edges, added nothing). Same conditions as
// touchLayerLists. It changes no decision. O(B).
func (sc *scratch) prefetchLayerOffsets() {
	if sc.rpf == nil || sc.st.maxBridges < 2 || sc.g.NumEntities() < touchMinEntities {
		return
	}
	n := sc.st.beam + 2
	for _, e := range [2]graphidx.EntityID{sc.s, sc.t} {
		rk := sc.g.RankedNeighbors(e)
		sc.rpf.PrefetchRankedOffsets(rk[:min(len(rk), n)])
	}
	if sc.rtp != nil {
		sc.ends = [2]graphidx.EntityID{sc.s, sc.t} // a field: a literal would escape
		sc.rtp.PrefetchRankedTables(sc.ends[:], n)
	}
}

// touchMinEntities is the smallest index touchLayerLists reads ahead in:
// below it the ranked-list offsets take at most 512 KiB.
const touchMinEntities = 1 << 16

// liveNodes decides which first-layer nodes layer2 extends, when a node's
// every chain is already beaten: with the heap holding k candidates
// (largest cost c_k), a two- or three-bridge chain whose first-layer node
// on the s side is a has proxy cost ≥ cost(s, a) + min over T1 of
// cost(c, t) + 2β, so when that reaches c_k, which only falls, every such
// chain would be pruned, and a's second-layer paths can match nothing
// that enters the heap (the same on the t side). It returns nil, nil
// (extend every node) unless all of these hold, under which leaving the
// paths out changes no decision:
//
//   - a one-bridge chain was dropped: then candidatesCut depends on
//     bound(1) alone, since bound(m) does not grow with m (β ≥ 0, λ ≥ 0,
//     c_hop ≥ 0), so the chains left out need not be recorded;
//   - s and t share at least half a beam of neighbours (the one-bridge
//     hits): the joins then have many matches and costing every
//     first-layer node up front pays for itself (on a sparse index it
//     would add look-ups the joins never make);
//   - every node's ranked prefix is whole or holds f paths (no beyond),
//     and the budget left covers every charge the full layers and joins
//     could make, so neither way can run out of budget.
//
// Cost: one look-up per first-layer node (batched), O(B) otherwise.
func (sc *scratch) liveNodes() (liveF, liveT []bool) {
	k, f := sc.st.maxCand, sc.st.fanOut
	f1, t1 := sc.f1, sc.t1
	nodes := len(f1) + len(t1)
	switch {
	case k == 0 || len(sc.heap) < k || sc.dropped&(1<<1) == 0 || !(sc.hb >= 0):
		return nil, nil
	case 2*len(sc.hits) < sc.st.beam:
		return nil, nil
	case sc.st.hooks != nil && sc.st.hooks.noLayerPruning:
		return nil, nil
	case sc.bud.left < nodes*(f+lookupUnits+f*lookupUnits):
		return nil, nil
	}
	for _, l := range [2][]step1{f1, t1} {
		for i := range l {
			x := l[i].id
			rk := sc.g.RankedNeighbors(x)
			// At most the two ends are not eligible (x is not in
			// its own list).
			if len(rk) < f+2 && !sc.whole(x, rk) {
				return nil, nil
			}
		}
	}
	s, t := sc.s, sc.t
	if sc.beginPrefetch(sc.bud.left/lookupUnits + 1) {
		for i := range f1 {
			if f1[i].cost != f1[i].cost {
				sc.wantEnd(0, int32(i))
			}
		}
		for i := range t1 {
			if t1[i].cost != t1[i].cost {
				sc.wantEnd(1, int32(i))
			}
		}
		sc.fetch()
	}
	minF, minT := math.Inf(1), math.Inf(1)
	for i := range f1 {
		if c, ok := sc.cost1(f1, int32(i), s); ok {
			minF = min(minF, c)
		}
	}
	for i := range t1 {
		if c, ok := sc.cost1(t1, int32(i), t); ok {
			minT = min(minT, c)
		}
	}
	bar := sc.heap[0].cost
	liveF, liveT = resetMarks(sc.liveF, len(f1)), resetMarks(sc.liveT, len(t1))
	for i := range f1 {
		c := f1[i].cost // NaN when the look-up failed: no chain through it
		liveF[i] = c == c && c+minT+2*sc.hb < bar
	}
	for i := range t1 {
		c := t1[i].cost
		liveT[i] = c == c && c+minF+2*sc.hb < bar
	}
	sc.liveF, sc.liveT = liveF, liveT
	if sc.st.hooks != nil && sc.st.hooks.layerPruned != nil {
		sc.st.hooks.layerPruned()
	}
	return liveF, liveT
}

// pathA is the first-layer node of path p of side (0: F2, 1: T2). O(1).
func (sc *scratch) pathA(side int, p *step2) graphidx.EntityID {
	if side == 0 {
		return sc.f1[p.li].id
	}
	return sc.t1[p.li].id
}

// knownC2 returns the cost of the second edge of path i of side when
// edgeCost2 has computed it in this decision, else NaN. O(1).
func (sc *scratch) knownC2(side int, i uint32) float64 {
	if sc.c2.stamp[side][i] == sc.c2.epoch {
		return sc.c2.val[side][i]
	}
	return math.NaN()
}

// edgeCost2 returns the cost of the second edge of path i of side, looking
// it up once; the cost is kept by path, stamped with the decision's epoch
// (resetC2), so that no per-path memory is written for paths no join
// costs. O(1) plus the look-up.
func (sc *scratch) edgeCost2(side int, i uint32) (float64, bool) {
	if c := sc.knownC2(side, i); c == c {
		return c, true
	}
	l := sc.f2
	if side == 1 {
		l = sc.t2
	}
	p := &l[i]
	c, ok := sc.edge(sc.pathA(side, p), p.b)
	if !ok {
		return 0, false
	}
	sc.c2.stamp[side][i], sc.c2.val[side][i] = sc.c2.epoch, c
	return c, true
}

// resetC2 forgets every second-edge cost (a new epoch) and makes room for
// the current layers' paths. O(1), or O(paths) when the arrays grow or the
// epoch wraps.
func (sc *scratch) resetC2() {
	sc.c2.epoch++
	if sc.c2.epoch == 0 {
		for side := range sc.c2.stamp {
			clear(sc.c2.stamp[side])
		}
		sc.c2.epoch = 1
	}
	for side, n := range [2]int{len(sc.f2), len(sc.t2)} {
		if len(sc.c2.stamp[side]) < n {
			sc.c2.stamp[side] = make([]uint32, n)
			sc.c2.val[side] = make([]float64, n)
		}
	}
}

// searchResult is the outcome of generate.
type searchResult struct {
	truncated bool
	deadline  bool
	cut       Cut
}

// generate fills sc.heap with the k proxy-cheapest chains of at most H
// bridges between s and t.
func (sc *scratch) generate() searchResult {
	g, s, t, H := sc.g, sc.s, sc.t, sc.st.maxBridges
	hb := sc.hb
	sc.heap = sc.heap[:0]
	if H == 0 {
		return searchResult{}
	}
	beamOK := true // no beam or fan-out left a chain out

	// m = 1: N(s) ∩ N(t), exact. The phase may spend half the budget, the
	// intersection itself half of that, so that the hits can be scored and
	// the beams still run when a hub makes the intersection long.
	sc.touchLayerLists()
	held := sc.bud.limit(sc.bud.left / 2)
	held2 := sc.bud.limit(sc.bud.left / 2)
	sc.intersect(g.Neighbors(s), g.Neighbors(t))
	sc.bud.unlimit(held2)
	// Every first edge s → z in one batch, with the second edges z → t of
	// the first oneChunk hits; the other second edges a chunk at a time
	// (fetchSecond), leaving out those the heap bound already prunes.
	next := len(sc.hits)
	if sc.beginPrefetch(sc.bud.left/lookupUnits + 1) {
		next = min(len(sc.hits), oneChunk)
		for i, z := range sc.hits {
			if z != s && z != t {
				sc.want(s, z)
				if i < next {
					sc.want(z, t)
				}
			}
		}
		sc.fetch()
	}
	for i, z := range sc.hits {
		if i == next {
			next = sc.fetchSecond(i)
		}
		if z == s || z == t {
			continue
		}
		c1, ok1 := sc.edge(s, z)
		if !ok1 {
			continue
		}
		if sc.prune(c1+hb, 1) {
			continue
		}
		c2, ok2 := sc.edge(z, t)
		if !ok2 {
			continue
		}
		sc.push(cand{cost: c1 + c2 + hb, b: [3]graphidx.EntityID{z}, m: 1}, false)
	}
	sc.bud.unlimit(held)
	if H == 1 {
		return sc.result(beamOK)
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
			return sc.result(beamOK)
		}
		if sc.bound(2) <= sc.inc.score {
			return sc.result(beamOK)
		}
	}

	// Beams from both ends.
	var f1ok, t1ok, f2ok, t2ok, f1cut, t1cut, f2cut, t2cut bool
	sc.f1, f1ok, f1cut = sc.layer1(sc.f1, s, t)
	sc.t1, t1ok, t1cut = sc.layer1(sc.t1, t, s)
	liveF, liveT := sc.liveNodes()
	// The two-bridge matches are found while the second layers are
	// written (layer2's probe); the old way, after them, under alt.
	inline, fired := !sc.alt, false
	if inline {
		fired = sc.indexFirstLayers()
	}
	sc.f2, f2ok, f2cut = sc.layer2(sc.f2, sc.f1, f1ok, s, t, liveF, &sc.nF2, 0, inline && !fired)
	sc.t2, t2ok, t2cut = sc.layer2(sc.t2, sc.t1, t1ok, t, s, liveT, &sc.nT2, 1, inline && !fired)
	sc.totF2, sc.totT2 = sumCounts(sc.nF2), sumCounts(sc.nT2)
	skip3 := H < 3 || (sc.inc.ok && sc.bound(3) <= sc.inc.score)
	sc.matchJoins(skip3, inline, fired)
	sc.joinAll()

	// A layer cut only by the budget counts as whole here: the budget cut
	// is reported on its own (CutBudget).
	bf1, bt1 := f1ok || !f1cut, t1ok || !t1cut
	bf2, bt2 := f2ok || !(f2cut || f1cut), t2ok || !(t2cut || t1cut)
	beamOK = (bf2 && bt1) || (bf1 && bt2)
	if H >= 3 && !skip3 {
		// The three-bridge join reads only B paths per side (beam3).
		beamOK = beamOK && bf2 && bt2 && sc.totF2 <= sc.st.beam && sc.totT2 <= sc.st.beam
	}
	return sc.result(beamOK)
}

// indexFirstLayers resets the join lists and indexes the two first
// layers for the two-bridge joins (f1ids, t1ids and their Bloom filters
// f1f, t1f; joinFilt reports whether the filters are tested), before the
// second layers are built, so that layer2 can probe every path as it
// writes it. It reports whether the deadline fired meanwhile (then the
// joins stay empty). The first layers hold 10⁵–10⁶ nodes for a hub, indexed
// without a budget charge: the deadline is polled every pollEvery nodes.
// O(|F1| + |T1|).
func (sc *scratch) indexFirstLayers() (fired bool) {
	f1, t1 := sc.f1, sc.t1
	sc.joinA, sc.joinB, sc.joinC = sc.joinA[:0], sc.joinB[:0], sc.joinC[:0]
	// The filters pay where most probes miss: a second-layer end is in
	// the other first layer with odds about |layer|/N, so they are used
	// when the index has at least filterMinRatio entities per first-layer
	// node (on a dense index most probes hit, and a filter test is extra
	// work on each).
	sc.joinFilt = sc.g.NumEntities() >= filterMinRatio*max(len(f1), len(t1))
	sc.f1ids.reset(len(f1))
	sc.f1f.reset()
	for i := range f1 {
		if i%pollEvery == pollEvery-1 && sc.bud.poll() {
			return true
		}
		sc.f1ids.put(uint64(f1[i].id), int32(i))
		sc.f1f.add(uint64(f1[i].id))
	}
	sc.t1ids.reset(len(t1))
	sc.t1f.reset()
	for i := range t1 {
		if i%pollEvery == pollEvery-1 && sc.bud.poll() {
			return true
		}
		sc.t1ids.put(uint64(t1[i].id), int32(i))
		sc.t1f.add(uint64(t1[i].id))
	}
	return false
}

// matchJoins lists the matches of the joins: F2 ⋈ T1 and F1 ⋈ T2 in layer
// order, each with its key (b, position in F2 or T2), the order a
// sort-merge of the id-sorted beams would meet them in, which joinAll uses
// to break ties; and, unless skip3, F2 ⋈ T2 in ascending (b, position in
// F2, position in T2). The matches are found by hashing the ids of one
// side (idIndex; probed only for the ids its Bloom filter idFilter may
// hold, which answers most misses with one bit test) instead of sorting
// all four beams and merging them (whose
// data-dependent branches mispredict about every other step); only the
// three-bridge join sorts its few keys. O(B·f) expected plus O(M3·log M3)
// for M3 three-bridge matches.
//
// With inline, indexFirstLayers indexed the first layers before the second
// layers were built and layer2 listed the two-bridge matches (fired: the
// deadline fired while indexing, and there are none); matchJoins then
// polls the deadline as its own pass over the layers would, and lists the
// three-bridge matches. Without inline it does all of it here, after the
// second layers (the code before the tenth round, kept under alt).
func (sc *scratch) matchJoins(skip3, inline, fired bool) {
	f2, t2 := sc.f2, sc.t2
	// The layers of a hub hold 10⁵–10⁶ entries, indexed here without a
	// budget charge: poll the deadline, and join nothing once it fired.
	clearJoins := func() {
		sc.joinA, sc.joinB, sc.joinC = sc.joinA[:0], sc.joinB[:0], sc.joinC[:0]
	}
	if inline {
		if fired {
			clearJoins()
			return
		}
		for _, n := range [2]int{len(f2), len(t2)} {
			for i := pollEvery - 1; i < n; i += pollEvery {
				if sc.bud.poll() {
					clearJoins()
					return
				}
			}
		}
	} else {
		if sc.indexFirstLayers() {
			clearJoins()
			return
		}
		fired := func(i int) bool {
			if i%pollEvery == pollEvery-1 && sc.bud.poll() {
				clearJoins()
				return true
			}
			return false
		}
		filt := sc.joinFilt
		for i := range f2 {
			if fired(i) {
				return
			}
			if filt && !sc.t1f.has(uint64(f2[i].b)) {
				continue
			}
			if yi, ok := sc.t1ids.get(uint64(f2[i].b)); ok {
				sc.joinA = append(sc.joinA, jpair{key: uint64(f2[i].b)<<32 | uint64(i), end: yi})
			}
		}
		for i := range t2 {
			if fired(i) {
				return
			}
			if filt && !sc.f1f.has(uint64(t2[i].b)) {
				continue
			}
			if xi, ok := sc.f1ids.get(uint64(t2[i].b)); ok {
				sc.joinB = append(sc.joinB, jpair{key: uint64(t2[i].b)<<32 | uint64(i), end: xi})
			}
		}
	}
	if skip3 {
		return
	}
	// The F2 paths whose end T2 has, then the T2 paths whose end is one
	// of those (few, so their index is small), both sorted, then merged
	// group by group.
	r3f, r3t := sc.beam3(sc.nF2, sc.totF2), sc.beam3(sc.nT2, sc.totT2)
	sc.beamF = beamPaths(sc.beamF[:0], f2, sc.starts[0], r3f)
	sc.beamT = beamPaths(sc.beamT[:0], t2, sc.starts[1], r3t)
	sc.t2ends.reset(len(t2))
	for _, i := range sc.beamT {
		sc.t2ends.put(uint64(t2[i].b), i)
	}
	fk, tk := sc.keysF[:0], sc.keysT[:0]
	for _, i := range sc.beamF {
		if _, ok := sc.t2ends.get(uint64(f2[i].b)); ok {
			fk = append(fk, uint64(f2[i].b)<<32|uint64(i))
		}
	}
	if len(fk) > 0 {
		sc.f2ends.reset(len(fk))
		for _, k := range fk {
			sc.f2ends.put(k>>32, 0)
		}
		for _, i := range sc.beamT {
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

// filterMinRatio is the number of index entities per first-layer node from
// which matchJoins tests the Bloom filters before its hash probes (above
// it, under one probe in 64 hits for a uniformly random end).
const filterMinRatio = 64

// rankCut selects the three-bridge beam of a second layer: the paths of
// rank position below r, and those at position r of first-layer nodes
// before li (see beam3).
type rankCut struct{ r, li int32 }

func (c rankCut) in(p *step2) bool { return p.r < c.r || (p.r == c.r && p.li < c.li) }

// beam3 returns the three-bridge beam of a second layer, from the path
// counts of its first-layer nodes (counts[li] paths of node li, at rank
// positions 0, 1, …) and their sum total: its B paths first in (rank
// position, first-layer position) order, i.e. the B paths a breadth-first
// walk of the first-layer nodes' ranked lists takes (the best-ranked
// extension of every node, then the second-best, …). The two-bridge joins
// use the whole layer (fan-out f per node); the three-bridge join F2 ⋈ T2,
// whose matches grow with the product of the two layers, uses this beam of
// B paths per side. O(total).
func (sc *scratch) beam3(counts []int32, total int) rankCut {
	B := sc.st.beam
	if total <= B {
		return rankCut{r: math.MaxInt32}
	}
	// cnt[r]: the nodes with a path at rank position r.
	cnt := sc.rcount[:0]
	for _, n := range counts {
		for len(cnt) < int(n) {
			cnt = append(cnt, 0)
		}
		for r := range int(n) {
			cnt[r]++
		}
	}
	sc.rcount = cnt
	left := B
	for r, c := range cnt {
		if c <= left {
			left -= c
			continue
		}
		// Level r is taken in part: its first `left` paths by li.
		li := int32(-1)
		if left > 0 {
			seen := 0
			for i, n := range counts {
				if int(n) > r {
					seen++
					if seen == left+1 {
						li = int32(i)
						break
					}
				}
			}
		}
		return rankCut{r: int32(r), li: li}
	}
	return rankCut{r: math.MaxInt32}
}

// beamPaths appends to dst the positions, ascending, of the paths of the
// second layer l that the three-bridge beam c admits. starts[li] is where
// first-layer node li's paths begin in l; a node's paths have rank
// positions 0, 1, … in order, so each node's run stops at its first path
// past c.r. O(|F1| + B) instead of a pass over all B·f paths.
func beamPaths(dst []int32, l []step2, starts []int32, c rankCut) []int32 {
	for li, st := range starts {
		end := int32(len(l))
		if li+1 < len(starts) {
			end = starts[li+1]
		}
		for i := st; i < end; i++ {
			p := &l[i]
			if p.r > c.r {
				break
			}
			if c.in(p) {
				dst = append(dst, i)
			}
		}
	}
	return dst
}

// sumCounts is the sum of path counts. O(len).
func sumCounts(counts []int32) int {
	t := 0
	for _, n := range counts {
		t += int(n)
	}
	return t
}

// match3 is a match of F2 ⋈ T2: positions in F2 and T2.
type match3 struct{ f, t uint32 }

// jpair is a match of F2 ⋈ T1 (or F1 ⋈ T2): key is b<<32 | the path's
// position in F2 (T2), end the position of b in T1 (F1).
type jpair struct {
	key uint64
	end int32
}

// jmatch is one join match (matchJoins) waiting to become a chain: kind
// 0 is F2 ⋈ T1 (i in joinA), 1 is F1 ⋈ T2 (i in joinB), 2 is F2 ⋈ T2 (i
// in joinC). lb is a lower bound of the chain's proxy cost: its two
// first-layer edges (the end edges) plus β·m, the middle edges counted as
// 0 (EdgeCost ≥ 0). ord breaks ties within a kind: the match's key (kinds
// 0 and 1) or i (kind 2, whose matches are listed in key order).
type jmatch struct {
	lb   float64
	ord  uint64
	i    int32
	kind uint8
}

// joinChunk is the number of matches whose middle edges are fetched in one
// batch: small enough that the heap bound prunes most matches before their
// look-ups, large enough that a batch's cache misses overlap. A match the
// bound already prunes when its chunk is queued is not fetched (joinLower),
// so a wider chunk wastes only the look-ups of matches that the chunk's own
// pushes then prune. On the 1M-entity benchmark index 16 measured faster
// than 8 (cpu p50 −0.4 µs) and than 32 (docs/SEARCH.md, seventh round).
const joinChunk = 16

// joinAll turns the join matches into candidates, cheapest lower bound
// first, so that the heap bound prunes the rest before their middle edges
// are looked up:
//
//  1. the end edges (s → first-layer node, first-layer node → t) of every
//     match are fetched in one batch and costed (they are shared by many
//     matches: at most |F1| + |T1| distinct edges, whatever M);
//  2. every match gets lb = end costs + β·m; when the heap already holds k
//     candidates, a match whose lb reaches the heap's largest cost is
//     dropped at once (that cost only falls as the heap fills with cheaper
//     chains, so the match would be pruned wherever it came; it is
//     recorded as a dropped chain, see candidatesCut), which on a dense
//     index is most of them;
//  3. in (lb, kind, key) order, popped from a heap, chunks of joinChunk
//     matches not yet prunable have their middle edges fetched in one
//     batch and are pushed; the first match whose lb reaches the heap's
//     largest cost ends the pass, since every later one is at least as
//     costly (those are dropped chains too).
//
// The order (lb, kind, key) is total and does not depend on the order
// matchJoins lists the matches in, so neither do the pushes, the prunes
// nor the drops. The end edges are costed (and charged to the budget) in
// that listing order, which matters only when the budget cannot cover
// every first-layer node: then the matches are first sorted by key, the
// order a sort-merge join meets them in.
//
// Cost: O(M + P·log M) for M matches of which P are popped, plus the
// look-ups of the end edges and of the middle edges of the matches scored
// before the bound prunes.
func (sc *scratch) joinAll() {
	s, t := sc.s, sc.t
	f1, t1, f2, t2 := sc.f1, sc.t1, sc.f2, sc.t2
	hb := sc.hb
	n := len(sc.joinA) + len(sc.joinB) + len(sc.joinC)
	if n == 0 {
		return
	}
	sc.resetC2()
	if sc.bud.left < (len(f1)+len(t1))*lookupUnits {
		byKey := func(x, y jpair) int { return cmp.Compare(x.key, y.key) }
		slices.SortFunc(sc.joinA, byKey)
		slices.SortFunc(sc.joinB, byKey)
	}
	// 1. End edges, each queued once.
	if sc.beginPrefetch(sc.bud.left/lookupUnits + 1) {
		endF, endT := resetMarks(sc.endF, len(f1)), resetMarks(sc.endT, len(t1))
		wantF := func(i int32) {
			if !endF[i] && f1[i].cost != f1[i].cost { // not yet costed
				endF[i] = true
				sc.wantEnd(0, i)
			}
		}
		wantT := func(i int32) {
			if !endT[i] && t1[i].cost != t1[i].cost {
				endT[i] = true
				sc.wantEnd(1, i)
			}
		}
		for _, p := range sc.joinA {
			wantF(f2[uint32(p.key)].li)
			wantT(p.end)
		}
		for _, p := range sc.joinB {
			wantF(p.end)
			wantT(t2[uint32(p.key)].li)
		}
		for _, mt := range sc.joinC {
			wantF(f2[mt.f].li)
			wantT(t2[mt.t].li)
		}
		sc.endF, sc.endT = endF, endT
		sc.fetch()
	}
	// 2. Lower bounds; matches the heap bound already prunes are dropped.
	bar := math.Inf(1)
	if k := sc.st.maxCand; k > 0 && len(sc.heap) == k {
		bar = sc.heap[0].cost
	}
	ms := sc.jms[:0]
	for i, p := range sc.joinA {
		c1, ok1 := sc.cost1(f1, f2[uint32(p.key)].li, s)
		c3, ok3 := sc.cost1(t1, p.end, t)
		if ok1 && ok3 {
			if lb := c1 + c3 + 2*hb; lb < bar {
				ms = append(ms, jmatch{lb: lb, ord: p.key, i: int32(i), kind: 0})
			} else {
				sc.drop(2)
			}
		}
	}
	for i, p := range sc.joinB {
		c1, ok1 := sc.cost1(f1, p.end, s)
		c3, ok3 := sc.cost1(t1, t2[uint32(p.key)].li, t)
		if ok1 && ok3 {
			if lb := c1 + c3 + 2*hb; lb < bar {
				ms = append(ms, jmatch{lb: lb, ord: p.key, i: int32(i), kind: 1})
			} else {
				sc.drop(2)
			}
		}
	}
	for i, mt := range sc.joinC {
		f, y := &f2[mt.f], &t2[mt.t]
		if f1[f.li].id == t1[y.li].id {
			continue // s→a→b→a→t is no simple chain
		}
		c1, ok1 := sc.cost1(f1, f.li, s)
		c4, ok4 := sc.cost1(t1, y.li, t)
		if ok1 && ok4 {
			if lb := c1 + c4 + 3*hb; lb < bar {
				ms = append(ms, jmatch{lb: lb, ord: uint64(i), i: int32(i), kind: 2})
			} else {
				sc.drop(3)
			}
		}
	}
	// 3. Chunks in lower-bound order, popped from a heap: the search
	// usually stops (prune) after a few chunks, so heapifying, O(M), and
	// popping what is used, O(used·log M), replaces sorting all M matches;
	// the order is the same total order (lb, kind, i), so is every
	// decision.
	h := len(ms)
	for i := h/2 - 1; i >= 0; i-- {
		jmSiftDown(ms[:h], i)
	}
	sc.jms = ms
	for h > 0 {
		if sc.prune(ms[0].lb, 2+int(ms[0].kind)/2) {
			for _, m := range ms[1:h] {
				sc.drop(2 + int(m.kind)/2)
			}
			return
		}
		chunk := sc.jchunk[:0]
		for len(chunk) < joinChunk && h > 0 {
			chunk = append(chunk, ms[0])
			h--
			ms[0] = ms[h]
			jmSiftDown(ms[:h], 0)
		}
		sc.jchunk = chunk
		if sc.beginPrefetch(sc.bud.left/lookupUnits + 1) {
			for _, m := range chunk {
				if sc.prunable(sc.joinLower(m)) {
					// joinOne prunes it without its middle edges: the
					// bar only falls and a known cost stays known.
					continue
				}
				switch m.kind {
				case 0:
					sc.want2(&f2[uint32(sc.joinA[m.i].key)], 0)
				case 1:
					sc.want2(&t2[uint32(sc.joinB[m.i].key)], 1)
				default:
					mt := sc.joinC[m.i]
					sc.want2(&f2[mt.f], 0)
					sc.want2(&t2[mt.t], 1)
				}
			}
			sc.fetch()
		}
		for _, m := range chunk {
			sc.joinOne(m)
		}
	}
}

// jmLess orders join matches by (lower bound, kind, ord): a total order,
// since ord is unique within a kind.
func jmLess(a, b *jmatch) bool {
	if a.lb != b.lb {
		return cmp.Less(a.lb, b.lb)
	}
	if a.kind != b.kind {
		return a.kind < b.kind
	}
	return a.ord < b.ord
}

// resetMarks returns marks resized to n entries, all false. O(n).
func resetMarks(marks []bool, n int) []bool {
	if cap(marks) < n {
		return make([]bool, n)
	}
	marks = marks[:n]
	clear(marks)
	return marks
}

// jmSiftDown restores the min-heap order of h (by jmLess) below i.
// O(log len(h)).
func jmSiftDown(h []jmatch, i int) {
	n := len(h)
	for {
		l := 2*i + 1
		if l >= n {
			return
		}
		m := l
		if r := l + 1; r < n && jmLess(&h[r], &h[l]) {
			m = r
		}
		if !jmLess(&h[m], &h[i]) {
			return
		}
		h[i], h[m] = h[m], h[i]
		i = m
	}
}

// joinLower is the lower bound of match m's proxy cost that joinOne tests
// before looking its edges up: its costs known so far (an unknown one
// counted as 0) plus β·m. O(1).
func (sc *scratch) joinLower(m jmatch) float64 {
	f1, t1, f2, t2 := sc.f1, sc.t1, sc.f2, sc.t2
	hb := sc.hb
	switch m.kind {
	case 0:
		fi := uint32(sc.joinA[m.i].key)
		return known(f1[f2[fi].li].cost) + known(sc.knownC2(0, fi)) + known(t1[sc.joinA[m.i].end].cost) + 2*hb
	case 1:
		ti := uint32(sc.joinB[m.i].key)
		return known(f1[sc.joinB[m.i].end].cost) + known(sc.knownC2(1, ti)) + known(t1[t2[ti].li].cost) + 2*hb
	default:
		mt := sc.joinC[m.i]
		return known(f1[f2[mt.f].li].cost) + known(sc.knownC2(0, mt.f)) + known(sc.knownC2(1, mt.t)) + known(t1[t2[mt.t].li].cost) + 3*hb
	}
}

// joinOne pushes the chain of match m. Costs are summed in path order
// (s→…→t) so that a two-bridge chain met by both F2 ⋈ T1 and F1 ⋈ T2 costs
// the same bit for bit and is kept once.
func (sc *scratch) joinOne(m jmatch) {
	s, t := sc.s, sc.t
	f1, t1, f2, t2 := sc.f1, sc.t1, sc.f2, sc.t2
	hb := sc.hb
	switch m.kind {
	case 0: // s→a→b, b→t
		fi := uint32(sc.joinA[m.i].key)
		f := &f2[fi]
		yi := sc.joinA[m.i].end
		if sc.prune(sc.joinLower(m), 2) {
			return
		}
		c1, ok1 := sc.cost1(f1, f.li, s)
		c2, ok2 := sc.edgeCost2(0, fi)
		c3, ok3 := sc.cost1(t1, yi, t)
		if ok1 && ok2 && ok3 {
			sc.push(cand{cost: c1 + c2 + c3 + 2*hb, b: [3]graphidx.EntityID{f1[f.li].id, f.b}, m: 2}, true)
		}
	case 1: // s→b (F1), t→c→b (T2): s→b→c→t
		ti := uint32(sc.joinB[m.i].key)
		y := &t2[ti]
		xi := sc.joinB[m.i].end
		if sc.prune(sc.joinLower(m), 2) {
			return
		}
		c1, ok1 := sc.cost1(f1, xi, s)
		c2, ok2 := sc.edgeCost2(1, ti)
		c3, ok3 := sc.cost1(t1, y.li, t)
		if ok1 && ok2 && ok3 {
			sc.push(cand{cost: c1 + c2 + c3 + 2*hb, b: [3]graphidx.EntityID{f1[xi].id, t1[y.li].id}, m: 2}, true)
		}
	default: // s→a→b (F2), t→c→b (T2): s→a→b→c→t
		mt := sc.joinC[m.i]
		f, y := &f2[mt.f], &t2[mt.t]
		if sc.prune(sc.joinLower(m), 3) {
			return
		}
		c1, ok1 := sc.cost1(f1, f.li, s)
		c2, ok2 := sc.edgeCost2(0, mt.f)
		c3, ok3 := sc.edgeCost2(1, mt.t)
		c4, ok4 := sc.cost1(t1, y.li, t)
		if ok1 && ok2 && ok3 && ok4 {
			sc.push(cand{cost: c1 + c2 + c3 + c4 + 3*hb, b: [3]graphidx.EntityID{f1[f.li].id, f.b, t1[y.li].id}, m: 3}, false)
		}
	}
}

// result reports the cuts of generation: the beams (beamOK false: a beam or
// fan-out left a chain out) and the budget or deadline. Candidates left out
// of the heap are judged after the exact scores (candidatesCut).
func (sc *scratch) result(beamOK bool) searchResult {
	var cut Cut
	if !beamOK {
		cut |= CutBeam
	}
	if sc.bud.deadline {
		cut |= CutDeadline
	} else if sc.bud.exhausted {
		cut |= CutBudget
	}
	return searchResult{truncated: cut != 0, deadline: sc.bud.deadline, cut: cut}
}

// candidatesCut reports whether a chain left out of the k candidates
// (dropped from the heap, or pruned as a partial path) could have beaten
// the best scored chain: a chain of m bridges has score ≤ bound(m), and a
// tie never replaces the best, so a dropped chain could have won only when
// bound(m) > best (or no chain was scored). O(H).
func (sc *scratch) candidatesCut(found bool, best float64) bool {
	for m := 1; m <= MaxBridgesLimit; m++ {
		if sc.dropped&(1<<m) != 0 && (!found || sc.bound(m) > best) {
			return true
		}
	}
	return false
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
	sc.inc.err, sc.inc.score, sc.inc.sep = e, score, sc.lastSep
	sc.incDist = append(sc.incDist[:0], est.Dist...)
	if sc.st.cfg.ParallelBridges {
		sc.incWit = append(sc.incWit[:0], sc.ws.SeparationWitnesses()...)
	}
	if sc.ref == nil {
		sc.ref, sc.refVar = sc.incDist, est.Var
		sc.refChain, sc.refC = true, c
		if rp, ok := sc.model.(scorer.ReferenceProjector); ok {
			// The reference chain's estimate, moved to the nearest point the
			// model's bound allows; the incumbent keeps its own estimate.
			sc.refBuf = append(sc.refBuf[:0], sc.incDist...)
			if err := rp.ProjectReference(sc.ws, sc, sc.s, sc.u, sc.t, sc.refBuf); err != nil {
				sc.err = err
				return false
			}
			sc.ref = sc.refBuf
		}
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
