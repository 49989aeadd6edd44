package router

import (
	"math"
	"slices"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// pairMemo remembers the pair look-ups of one decision, keyed by the
// unordered pair, with the pair's edge cost once computed. Generation looks
// every edge of every candidate up, and stage 2 (model.Chain through the
// scratch's Stats view), the adjacency test, the direct estimate and the
// MinSupport pass read the same pairs again: on the 100k-entity benchmark
// index a decision made 116 Graph.Pair calls, about half of them repeats,
// each a binary search in a (often hub-sized) adjacency list.
//
// The table is open-addressed with linear probing (Knuth, TAOCP vol. 3
// §6.4, algorithm L) on a multiplicative hash of lo<<32|hi, kept at most
// half full; the slots used in a decision are listed so that clear drops
// only those (and with them every reference into index memory). O(1)
// expected per look-up; no allocation once the table has grown to the
// largest decision seen.
type pairMemo struct {
	tab   []memoEntry
	used  []int32 // occupied slots, in insertion order
	shift uint    // 64 − log2(len(tab))
}

// find returns the slot of key, or of the empty slot where it belongs.
func (m *pairMemo) find(key uint64) (int, bool) {
	mask := len(m.tab) - 1
	for i := memoHash(key, m.shift); ; i = (i + 1) & mask {
		e := &m.tab[i]
		if !e.full {
			return i, false
		}
		if e.key == key {
			return i, true
		}
	}
}

// reserve enters (lo, hi) without statistics and reports true, or reports
// false when the pair is already remembered. The caller must fill the
// entry (fetch) before the next get.
func (m *pairMemo) reserve(lo, hi graphidx.EntityID) bool {
	if m.tab == nil {
		m.init(memoMinSlots)
	}
	key := uint64(lo)<<32 | uint64(hi)
	i, found := m.find(key)
	if found {
		return false
	}
	if 2*(len(m.used)+1) > len(m.tab) {
		m.grow()
		i, _ = m.find(key)
	}
	m.tab[i] = memoEntry{key: key, full: true}
	m.used = append(m.used, int32(i))
	return true
}

// memoEntry is one remembered pair (lo, hi), lo < hi or lo == hi.
type memoEntry struct {
	key  uint64 // lo<<32 | hi
	full bool
	ok   bool               // the graph has statistics for the pair
	cost float64            // model.EdgeCost(ps), NaN until computed
	lb   float64            // the Bayes model's signal bound of ps, when lbOK
	lbOK bool               // lb was computed with cost (edgeCost)
	ps   graphidx.PairStats // in (lo, hi) orientation
}

const memoMinSlots = 256

func memoHash(key uint64, shift uint) int { return int((key * 0x9e3779b97f4a7c15) >> shift) }

// entry returns the slot of (lo, hi) and whether it was filled before; a
// new slot is entered with the key only, and the caller fills it before
// the next call.
func (m *pairMemo) entry(lo, hi graphidx.EntityID) (*memoEntry, bool) {
	if m.tab == nil {
		m.init(memoMinSlots)
	}
	key := uint64(lo)<<32 | uint64(hi)
	i, found := m.find(key)
	if found {
		return &m.tab[i], true
	}
	if 2*(len(m.used)+1) > len(m.tab) {
		m.grow()
		i, _ = m.find(key)
	}
	e := &m.tab[i]
	*e = memoEntry{key: key, full: true, cost: math.NaN()}
	m.used = append(m.used, int32(i))
	return e, false
}

// memoGet returns the memo entry of (lo, hi), lo ≤ hi, looking the pair up
// in the graph on the first request, unless an endpoint's adjacency list
// held in the scratch (endLists) shows the pair was never observed. The
// pointer is valid until the next memoGet.
func (sc *scratch) memoGet(lo, hi graphidx.EntityID) *memoEntry {
	e, found := sc.memo.entry(lo, hi)
	if found || sc.ruledOut(lo, hi) {
		return e
	}
	if sc.rkS == nil && sc.rkT == nil {
		e.ps, e.ok = sc.g.Pair(lo, hi)
		return e
	}
	if owner, other, ent, named := sc.endEntry(lo, hi); named {
		e.ps, e.ok = sc.rankedPair(owner, other, ent)
		if e.ok && e.ps.A != lo {
			e.ps = e.ps.Transpose() // the memo holds the (lo, hi) orientation
		}
		return e
	}
	e.ps, e.ok = sc.g.Pair(lo, hi)
	return e
}

// endEntry names the pair {a, b} by its entry in the ranked list of s or
// t when one of them is s or t and the other is in that endpoint's ranked
// list (kept by endLists): owner is the endpoint, other the entity at its
// ranked entry ent. Most pairs the scorer asks one at a time have an
// endpoint on one side (the influence bound's (s, w) for the neighbours w
// of s, the separation check's witnesses of the first and last bridge), and
// the other side is often a hub, whose upper list a plain look-up would
// binary-search (about twenty dependent cache misses for the benchmark
// index's largest hub). Only for graphs with PairBatchRanked, and ranked
// lists that are whole (endLists). O(len of the ranked list), at most
// endRankMax steps, in cache.
func (sc *scratch) endEntry(a, b graphidx.EntityID) (owner, other graphidx.EntityID, ent uint32, ok bool) {
	if sc.rb == nil {
		return 0, 0, 0, false
	}
	for range 2 {
		for j, x := range sc.endOf(a, sc.rkS, sc.rkT) {
			if x == b {
				return a, b, uint32(j), true
			}
		}
		a, b = b, a
	}
	return 0, 0, 0, false
}

// endRankMax is the longest ranked list of s or t that endEntry scans. A
// list is kept only when it is whole (it holds every neighbour), so a scan
// fails only for a pair that was never observed, which ruledOut answers
// first where the scratch asks the graph one pair at a time.
const endRankMax = 64

// rankedPair looks the pair (owner, RankedNeighbors(owner)[ent] = other)
// up by its ranked entry (RankedPairBatcher, one pair), in the
// orientation (owner, other). O(1) reads of the index.
func (sc *scratch) rankedPair(owner, other graphidx.EntityID, ent uint32) (graphidx.PairStats, bool) {
	o := &sc.one
	o.a[0], o.b[0], o.ent[0] = owner, other, ent
	sc.rb.PairBatchRanked(o.a[:], o.b[:], o.ent[:], o.ps[:], o.ok[:])
	ps, ok := o.ps[0], o.ok[0]
	o.ps[0] = graphidx.PairStats{} // drop the reference into the index
	return ps, ok
}

// endListMax is the longest adjacency list of an endpoint that the scratch
// keeps for ruledOut: 512 ids are 2 KiB, which the one-bridge phase's
// intersection has just read, and a binary search in them is about nine
// steps in cache, against a look-up in the index (the lower entity's list
// offsets, then a binary search in its list: cache misses on a large
// index).
const endListMax = 512

// endLists keeps the adjacency lists of the decision's endpoints s and t
// when they have at most endListMax entries (else nil). O(1).
func (sc *scratch) endLists() {
	sc.nbrS, sc.nbrT = nil, nil
	sc.rkS, sc.rkT = nil, nil
	if sc.rb != nil {
		if l := sc.g.RankedNeighbors(sc.s); len(l) <= endRankMax && sc.whole(sc.s, l) {
			sc.rkS = l
		}
		if l := sc.g.RankedNeighbors(sc.t); len(l) <= endRankMax && sc.whole(sc.t, l) {
			sc.rkT = l
		}
	}
	if l := sc.g.Neighbors(sc.s); len(l) <= endListMax {
		sc.nbrS = l
	}
	if l := sc.g.Neighbors(sc.t); len(l) <= endListMax {
		sc.nbrT = l
	}
}

// ruledOut reports that the pair {a, b} has no statistics because one of
// its entities is s or t, whose adjacency list is kept (endLists), and the
// other is not in that list: a Graph's Pair is ok only for a listed
// neighbour (Graph). Most pairs the separation check asks about (a
// bridge's ranked neighbour with s or t) are of this kind. It changes no
// answer, only spares the graph look-up. O(log endListMax).
func (sc *scratch) ruledOut(a, b graphidx.EntityID) bool {
	for range 2 {
		if l := sc.endOf(a, sc.nbrS, sc.nbrT); l != nil {
			if _, in := slices.BinarySearch(l, b); !in {
				return true
			}
		}
		a, b = b, a
	}
	return false
}

// endOf returns ofS when a is the decision's s, ofT when it is t, else
// nil: the list kept for that endpoint (endLists). O(1).
func (sc *scratch) endOf(a graphidx.EntityID, ofS, ofT []graphidx.EntityID) []graphidx.EntityID {
	switch a {
	case sc.s:
		return ofS
	case sc.t:
		return ofT
	}
	return nil
}

func (m *pairMemo) init(slots int) {
	m.tab = make([]memoEntry, slots)
	m.shift = uint(64 - log2(slots))
	m.used = m.used[:0]
}

// grow doubles the table and re-inserts the entries in insertion order.
func (m *pairMemo) grow() {
	old, oldUsed := m.tab, m.used
	m.init(2 * len(old))
	mask := len(m.tab) - 1
	for _, j := range oldUsed {
		e := &old[j]
		i := memoHash(e.key, m.shift)
		for m.tab[i].full {
			i = (i + 1) & mask
		}
		m.tab[i] = *e
		m.used = append(m.used, int32(i))
	}
}

// clear empties the table in O(entries used).
func (m *pairMemo) clear() {
	for _, i := range m.used {
		m.tab[i] = memoEntry{}
	}
	m.used = m.used[:0]
}

func log2(n int) int {
	l := 0
	for 1<<l < n {
		l++
	}
	return l
}

// pairStats returns the statistics of the ordered pair (a, b) through the
// memo: one Graph.Pair call per unordered pair and decision, the reverse
// orientation by PairStats.Transpose (the same view Graph.Pair(b, a)
// returns; graphidx.PairStats counts mean a=u, b=v whichever way the pair
// is stored).
func (sc *scratch) pairStats(a, b graphidx.EntityID) (graphidx.PairStats, bool) {
	lo, hi := a, b
	if a > b {
		lo, hi = b, a
	}
	e := sc.memoGet(lo, hi)
	if !e.ok {
		return e.ps, false
	}
	if a > b {
		return e.ps.Transpose(), true
	}
	return e.ps, true
}

// PairBatcher is an optional interface of a Graph: PairBatch sets out[i],
// ok[i] = Pair(a[i], b[i]) for every i < len(a) (b, out and ok at least as
// long as a), in less time than as many Pair calls. *graphidx.Index
// implements it. When the graph does, the search fetches the pairs that a
// phase will read in one batch before the phase starts (see fetch); a
// wrapper around an Index should forward the method.
type PairBatcher interface {
	PairBatch(a, b []graphidx.EntityID, out []graphidx.PairStats, ok []bool)
}

// HintedPairBatcher is an optional interface of a Graph: RankedPairHints
// returns, parallel to RankedNeighbors(id), a hint per entry that names
// where the pair is stored, and PairBatchHinted is PairBatch that takes a
// hint per pair (graphidx.NoPairHint when unknown) and returns the same
// statistics, in less time for hinted pairs. *graphidx.Index implements it
// (format version 2 and later: a hinted look-up reads one checked list entry instead
// of binary-searching a neighbour list). The search passes the hint of
// every edge it reached through a ranked list: the first-layer edges (end
// edges of the joins) and the second-layer edges (their middle edges). A
// wrapper around an Index should forward both methods.
type HintedPairBatcher interface {
	RankedPairHints(id graphidx.EntityID) []uint32
	PairBatchHinted(a, b []graphidx.EntityID, hint []uint32, out []graphidx.PairStats, ok []bool)
}

// RankedPairBatcher is an optional interface of a Graph: PairBatchRanked
// is PairBatch where entry[i] names the pair by its place in a ranked list
// (b[i] is RankedNeighbors(a[i])[entry[i]], or entry[i] is
// graphidx.NoPairHint), and returns the same statistics, in less time for
// named pairs. *graphidx.Index implements it: on an index checked at open
// the look-up reads the pair's table reference stored beside the ranked
// entry (format version 3) and the table, no adjacency offsets, list
// entry, pair base or table offsets. When the graph implements it, the search
// names every edge it reached through a ranked list this way (the joins'
// end and middle edges) and need not read the ranked lists' pair hints
// (HintedPairBatcher) up front. A wrapper around an Index should forward
// it.
type RankedPairBatcher interface {
	PairBatchRanked(a, b []graphidx.EntityID, entry []uint32, out []graphidx.PairStats, ok []bool)
}

// RankedTablePrefetcher is an optional interface of a Graph: hints that
// pairs named by the first n entries of the ranked lists of ids will soon
// be looked up by entry (RankedPairBatcher) and read, so that what those
// look-ups read starts loading now (*graphidx.Index, with prefetch
// instructions: PrefetchRankedTables the entries' stored table
// references, PrefetchRankedCounts, best after it, the pairs' count
// tables). Neither may change any answer of the graph. A wrapper around an
// Index should forward both.
type RankedTablePrefetcher interface {
	PrefetchRankedTables(ids []graphidx.EntityID, n int)
	PrefetchRankedCounts(ids []graphidx.EntityID, n int)
}

// RankedPrefetcher is an optional interface of a Graph: hints that the
// ranked lists of some entities will soon be read, so that their cache
// misses overlap the work before (*graphidx.Index implements it with
// prefetch instructions). PrefetchRankedOffsets starts loading what
// RankedNeighbors(id) reads to find each list; PrefetchRankedHeads the
// first n entries of each list. Neither may change any answer of the
// graph. A wrapper around an Index should forward both.
type RankedPrefetcher interface {
	PrefetchRankedOffsets(ids []graphidx.EntityID)
	PrefetchRankedHeads(ids []graphidx.EntityID, n int)
}

// EntityPrefetcher is an optional interface of a Graph: PrefetchEntity
// hints that the value count, the marginal and the first n entries of the
// neighbour list and of the ranked list of id will soon be read, so that
// their cache misses overlap the work before (*graphidx.Index implements it
// with prefetch instructions). It may not change any answer of the graph.
// The router calls it for a query's two endpoints as soon as their names
// are looked up: the direct estimate and the one-bridge phase read those
// records first. A wrapper around an Index should forward it.
type EntityPrefetcher interface {
	PrefetchEntity(id graphidx.EntityID, n int)
}

// endPrefetch is how many entries of an endpoint's neighbour list and
// ranked list the router asks EntityPrefetcher to load: 8 cache lines of
// each, the whole list of a typical entity and the head of the ranked
// list that the first layer reads (B + 2 entries at the default beam).
const endPrefetch = 128

// want queues the unordered pair {a, b} for the next fetch unless the
// memo already has it or the queue holds sc.pendMax pairs.
// A pair with s or t on one side is named by its entry in that endpoint's
// ranked list when it is there (endEntry): the one-bridge phase's pairs
// (s, z) and (z, t), whose other side is often a hub.
// (The test of the two lists spares the call where neither is kept, as on
// a dense index, whose phases queue thousands of pairs.)
func (sc *scratch) want(a, b graphidx.EntityID) {
	if sc.rkS != nil || sc.rkT != nil {
		if owner, other, ent, named := sc.endEntry(a, b); named {
			sc.wantRanked(owner, other, ent, graphidx.NoPairHint)
			return
		}
	}
	sc.wantRanked(a, b, graphidx.NoPairHint, graphidx.NoPairHint)
}

// wantRanked is want for a pair reached through owner's ranked list: other
// is its entry ent (RankedPairBatcher), and pos is the pair's stored
// position (HintedPairBatcher; graphidx.NoPairHint when unknown or not
// needed).
func (sc *scratch) wantRanked(owner, other graphidx.EntityID, ent, pos uint32) {
	if len(sc.pend.a) >= sc.pendMax {
		return
	}
	sc.queue(owner, other, ent, pos)
}

// queue adds the pair {a, b} to the next fetch, with b's entry ent in a's
// ranked list and the pair's stored position pos (either may be
// graphidx.NoPairHint), unless the memo already has or awaits it. The
// caller checks the queue's bound.
func (sc *scratch) queue(a, b graphidx.EntityID, ent, pos uint32) {
	if sc.memo.reserve(min(a, b), max(a, b)) {
		sc.pend.a = append(sc.pend.a, a)
		sc.pend.b = append(sc.pend.b, b)
		sc.pend.ent = append(sc.pend.ent, ent)
		sc.pend.hint = append(sc.pend.hint, pos)
	}
}

// wantEnd queues the end edge of first-layer node i of side (0: s → F1[i],
// 1: t → T1[i]), named by its entry in the origin's ranked list.
func (sc *scratch) wantEnd(side int, i int32) {
	l, origin := sc.f1, sc.s
	if side == 1 {
		l, origin = sc.t1, sc.t
	}
	x := &l[i]
	sc.wantRanked(origin, x.id, x.ent, hintAt(sc.h1[side], x.ent))
}

// hintAt returns hk[ent], or graphidx.NoPairHint when ent is out of hk.
func hintAt(hk []uint32, ent uint32) uint32 {
	if uint64(ent) < uint64(len(hk)) {
		return hk[ent]
	}
	return graphidx.NoPairHint
}

// want2 queues the second edge a → p.b of a path of side's second layer
// (0: s, 1: t; a its first-layer node) with its entry in a's ranked list
// (kept by layer2) and its hint: p.b is the path's r-th eligible entry,
// so it sits at position r to r+3 of the list (at most the layer's two
// ends and a itself come before it and are not eligible); a path from
// beyond is in no ranked list and gets neither. O(1).
func (sc *scratch) want2(p *step2, side int) {
	ent, pos := uint32(graphidx.NoPairHint), uint32(graphidx.NoPairHint)
	if int(p.li) < len(sc.rks[side]) {
		rk := sc.rks[side][p.li]
		for j := int(p.r); j < min(len(rk), int(p.r)+4); j++ {
			if rk[j] == p.b {
				ent = uint32(j)
				pos = hintAt(sc.hks[side][p.li], ent)
				break
			}
		}
	}
	sc.wantRanked(sc.pathA(side, p), p.b, ent, pos)
}

// rankedHints returns the graph's hints for id's ranked list when it has
// them, they cover at least n entries and the graph has no
// PairBatchRanked (which reads them itself), else nil. O(1).
func (sc *scratch) rankedHints(id graphidx.EntityID, n int) []uint32 {
	if sc.hp == nil || sc.rb != nil {
		return nil
	}
	h := sc.hp.RankedPairHints(id)
	if len(h) < n {
		return nil
	}
	return h
}

// maxPrefetch caps one prefetch batch. A batch runs without polling the
// context, so its size bounds the work done past a deadline: 4096 pairs are
// a few milliseconds at most (about 0.3 µs per pair with its edge cost on
// the benchmark index). Pairs beyond the cap are read one at a time by the
// phase, charged to the budget and polled as before.
const maxPrefetch = 4096

// beginPrefetch starts a queue of at most min(n, maxPrefetch) pairs
// (n ≥ 0). It reports false (and queues nothing) when the graph has no
// PairBatch.
func (sc *scratch) beginPrefetch(n int) bool {
	if sc.pb == nil || n <= 0 {
		return false
	}
	sc.pendMax = min(n, maxPrefetch)
	sc.pend.a, sc.pend.b, sc.pend.ent, sc.pend.hint = sc.pend.a[:0], sc.pend.b[:0], sc.pend.ent[:0], sc.pend.hint[:0]
	return true
}

// fetch looks the queued pairs up with one PairBatch call and fills their
// memo slots, so that the phase that follows finds every pair in the memo;
// an edge cost is computed only when the phase asks for it (scratch.edge),
// so a fetched pair that the phase prunes costs no EdgeCost. It changes no decision: the memo returns
// what Graph.Pair would, and the budget is still charged per edge by the
// phase itself (sc.edge). Pairs the phase then prunes were fetched in vain;
// on the benchmark index that is about one in eight.
func (sc *scratch) fetch() {
	n := len(sc.pend.a)
	if n == 0 {
		return
	}
	if cap(sc.pend.ps) < n {
		sc.pend.ps = make([]graphidx.PairStats, n)
		sc.pend.ok = make([]bool, n)
	}
	ps, ok := sc.pend.ps[:n], sc.pend.ok[:n]
	switch {
	case sc.rb != nil:
		sc.rb.PairBatchRanked(sc.pend.a, sc.pend.b, sc.pend.ent, ps, ok)
	case sc.hp != nil:
		sc.hp.PairBatchHinted(sc.pend.a, sc.pend.b, sc.pend.hint, ps, ok)
	default:
		sc.pb.PairBatch(sc.pend.a, sc.pend.b, ps, ok)
	}
	// Start loading every table first (prefetch instructions: the memo
	// is filled meanwhile), instead of one cache miss per EdgeCost later.
	// Loads that waited for the tables here instead cost 0.4–0.5 µs per
	// decision more on the 1M-entity benchmark index (docs/SEARCH.md,
	// eighth round).
	graphidx.PrefetchTables(ps, ok)
	for i, a := range sc.pend.a {
		b, p := sc.pend.b[i], ps[i]
		if a > b { // the memo holds the (lo, hi) orientation
			a, b = b, a
			if ok[i] {
				p = p.Transpose()
			}
		}
		j, _ := sc.memo.find(uint64(a)<<32 | uint64(b))
		e := &sc.memo.tab[j]
		e.ok, e.ps, e.cost, e.lbOK = ok[i], p, math.NaN(), false
		ps[i] = graphidx.PairStats{} // drop the reference into the index
	}
	sc.pend.a, sc.pend.b, sc.pend.ent, sc.pend.hint = sc.pend.a[:0], sc.pend.b[:0], sc.pend.ent[:0], sc.pend.hint[:0]
}

// NumValues implements scorer.Stats for the model calls of a decision.
// For a bridge of the chain being scored (sc.path) it answers from the
// memo's statistics of the edge into the bridge, which every candidate's
// proxy cost has looked up (memoNumValues), instead of reading the
// entity's value count: a cache miss per bridge on a large index. O(H).
func (sc *scratch) NumValues(id graphidx.EntityID) int {
	if k, ok := sc.memoNumValues(id); ok {
		return k
	}
	return sc.g.NumValues(id)
}

// memoNumValues returns the number of values of id from the memo entry of
// the edge (x, id), x the entity before id on sc.path (s before the
// first bridge), when id is on sc.path and the memo holds the edge with
// statistics. Only for a graph with PairBatchRanked (*graphidx.Index and
// its wrappers), whose pair statistics carry the value counts NumValues
// returns (an index checks them at open, or reads them with the pair); for
// other graphs the scorer's own check of Pair's sizes against NumValues
// (scorer.ErrBadStats) stays as it was. It changes no value, so no
// decision. O(H) plus one memo probe.
func (sc *scratch) memoNumValues(id graphidx.EntityID) (int, bool) {
	if sc.rb == nil || len(sc.memo.tab) == 0 {
		return 0, false
	}
	x := sc.s
	for _, b := range sc.path {
		if b == id {
			lo, hi := min(x, id), max(x, id)
			i, found := sc.memo.find(uint64(lo)<<32 | uint64(hi))
			if e := &sc.memo.tab[i]; found && e.ok && lo != hi {
				if e.ps.A == id {
					return e.ps.KA, true
				}
				return e.ps.KB, true
			}
			return 0, false
		}
		x = b
	}
	return 0, false
}

// Pair implements scorer.Stats through the decision's pair memo.
func (sc *scratch) Pair(a, b graphidx.EntityID) (graphidx.PairStats, bool) { return sc.pairStats(a, b) }

// WantPair implements scorer.PairPrefetcher: it queues the pair {a, b} for
// the next FetchPairs unless the memo has it, the endpoint lists rule it
// out (ruledOut) or the graph has no PairBatch. A pair reached through a's
// ranked list (ent) or with s or t on one side (endEntry) is named by its
// ranked entry. It changes no answer: the memo then holds what Graph.Pair
// returns. O(1) expected plus endEntry's scan.
func (sc *scratch) WantPair(a, b graphidx.EntityID, ent uint32) {
	if sc.pb == nil || a == b || len(sc.pend.a) >= maxPrefetch || sc.ruledOut(a, b) {
		return
	}
	if ent == graphidx.NoPairHint {
		if owner, other, e, named := sc.endEntry(a, b); named {
			a, b, ent = owner, other, e
		}
	}
	sc.queue(a, b, ent, graphidx.NoPairHint)
}

// FetchPairs implements scorer.PairPrefetcher: the pairs WantPair queued
// in one batch (fetch).
func (sc *scratch) FetchPairs() { sc.fetch() }

// edgeCost computes the edge cost of the memo entry e (e.ok) and keeps it;
// with the Bayes model it keeps the signal bound the cost is −log of, too
// (KnownSignalBound). O(model.EdgeCost).
func (sc *scratch) edgeCost(e *memoEntry) float64 {
	if sc.bayes != nil {
		e.cost, e.lb = sc.bayes.EdgeCostBound(e.ps)
		e.lbOK = true
		return e.cost
	}
	e.cost = sc.model.EdgeCost(e.ps)
	return e.cost
}

// KnownSignalBound implements scorer.KnownSignalBounder: the signal bound
// of the pair (a, b) that edgeCost kept in the memo, when sig is the
// decision's model and it was computed in that orientation or the table
// is 2×2 (whose bound is the same bit for bit either way: scorer's
// cramersV). It looks nothing up. O(1) expected.
func (sc *scratch) KnownSignalBound(sig *scorer.Bayes, a, b graphidx.EntityID) (float64, bool) {
	if sig == nil || sig != sc.bayes || len(sc.memo.tab) == 0 {
		return 0, false
	}
	lo, hi := min(a, b), max(a, b)
	i, found := sc.memo.find(uint64(lo)<<32 | uint64(hi))
	e := &sc.memo.tab[i]
	if !found || !e.ok || !e.lbOK {
		return 0, false
	}
	if a > b && (e.ps.KA != 2 || e.ps.KB != 2) {
		return 0, false
	}
	return e.lb, true
}
