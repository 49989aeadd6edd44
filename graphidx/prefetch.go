package graphidx

import "unsafe"

// prefetchChunk is the number of addresses one prefetchAll call takes.
const prefetchChunk = 64

// prefetchBatch gathers addresses and hands them to prefetchAll
// prefetchChunk at a time.
type prefetchBatch struct {
	addr [prefetchChunk]uintptr
	n    int
}

// add queues the cache line at p, issuing the batch when it is full (n is
// below prefetchChunk, a power of two, here: the mask only spares the
// bounds check, so that add inlines).
func (pb *prefetchBatch) add(p unsafe.Pointer) {
	pb.addr[pb.n&(prefetchChunk-1)] = uintptr(p)
	if pb.n++; pb.n == prefetchChunk {
		pb.issue()
	}
}

// issue hands the queued addresses to prefetchAll and empties the batch.
//
//go:noinline
func (pb *prefetchBatch) issue() {
	prefetchAll(&pb.addr[0], pb.n)
	pb.n = 0
}

// addLines queues every cache line xs spans: entries a line apart from the
// first hit every line up to the last step, and the last entry covers the
// line after it (an empty xs queues nothing).
func addLines[T uint32 | uint64](pb *prefetchBatch, xs []T) {
	if len(xs) == 0 {
		return
	}
	perLine := 64 / int(unsafe.Sizeof(xs[0]))
	for k := 0; k < len(xs); k += perLine {
		pb.add(unsafe.Pointer(&xs[k]))
	}
	if (len(xs)-1)%perLine != 0 {
		pb.add(unsafe.Pointer(&xs[len(xs)-1]))
	}
}

// flush issues what is queued.
func (pb *prefetchBatch) flush() {
	if pb.n > 0 {
		pb.issue()
	}
}

// PrefetchRankedOffsets tells the index that RankedNeighbors will soon be
// called for each of ids: it starts loading their ranked-list offsets into
// the CPU cache and returns without waiting for them, so that the loads
// overlap whatever the caller does next (on amd64 and arm64 a prefetch
// instruction per id; elsewhere nothing). It reads no index data, changes
// no answer and never fails; ids out of range are skipped. O(len(ids)).
func (x *Index) PrefetchRankedOffsets(ids []EntityID) {
	if !canPrefetch {
		return
	}
	v := x.v.Load()
	var pb prefetchBatch
	for _, id := range ids {
		if uint64(id)+1 >= uint64(len(v.rankOffs)) {
			continue
		}
		pb.add(unsafe.Pointer(&v.rankOffs[id]))
	}
	pb.flush()
}

// PrefetchRankedHeads tells the index that the first n entries of
// RankedNeighbors(id) will soon be read for each of ids: it reads their
// offsets (best after PrefetchRankedOffsets, when they are in cache) and
// starts loading the cache lines of the first and the n-th entry of each
// list without waiting for them (amd64 and arm64; elsewhere nothing). It
// changes no answer and never fails; ids out of range are skipped.
// O(len(ids)).
func (x *Index) PrefetchRankedHeads(ids []EntityID, n int) {
	if !canPrefetch || n <= 0 {
		return
	}
	v := x.v.Load()
	var pb prefetchBatch
	for _, id := range ids {
		s, e, ok := span(v.rankOffs, uint64(id), len(v.rank))
		if !ok || s == e {
			continue
		}
		pb.add(unsafe.Pointer(&v.rank[s]))
		pb.add(unsafe.Pointer(&v.rank[min(e, s+n)-1]))
	}
	pb.flush()
}

// PrefetchRankedTables tells the index that pairs named by the first n
// entries of the ranked lists of ids will soon be looked up with
// PairBatchRanked: it starts loading those entries' table references
// (section ranked-pair-tables), every cache line they span, without
// waiting for them (amd64 and arm64; elsewhere nothing). Only on an index
// checked at open, the only kind whose references PairBatchRanked reads.
// It reads the lists' offsets (best when they are in cache), changes no
// answer and never fails; ids out of range are skipped. O(len(ids)·n/8).
func (x *Index) PrefetchRankedTables(ids []EntityID, n int) {
	v := x.v.Load()
	if !canPrefetch || n <= 0 || !v.checked || len(v.rankTab) != len(v.rank) {
		return
	}
	var pb prefetchBatch
	for _, id := range ids {
		if s, e, ok := span(v.rankOffs, uint64(id), len(v.rankTab)); ok {
			addLines(&pb, v.rankTab[s:min(e, s+n)])
		}
	}
	pb.flush()
}

// PrefetchRankedCounts tells the index that the pairs named by the first
// n entries of the ranked lists of ids will soon be read: it reads those
// entries' table references (best after PrefetchRankedTables, when they
// are in cache) and starts loading the first cache line of each pair's
// count table without waiting for it (amd64 and arm64; elsewhere
// nothing). Only on an index checked at open; a reference past the counts
// is skipped. It changes no answer and never fails; ids out of range are
// skipped. O(len(ids)·n).
func (x *Index) PrefetchRankedCounts(ids []EntityID, n int) {
	v := x.v.Load()
	if !canPrefetch || n <= 0 || !v.checked || len(v.rankTab) != len(v.rank) {
		return
	}
	var pb prefetchBatch
	for _, id := range ids {
		s, e, ok := span(v.rankOffs, uint64(id), len(v.rankTab))
		if !ok || s == e {
			continue
		}
		for _, r := range v.rankTab[s:min(e, s+n)] {
			if st, _, _ := rankTabSplit(r); st < uint64(len(v.counts)) {
				pb.add(unsafe.Pointer(&v.counts[st]))
			}
		}
	}
	pb.flush()
}

// PrefetchTables starts loading the count table of each ps[i] with ok[i]
// (ok at least as long as ps) into the CPU cache, without waiting for it
// (amd64 and arm64; elsewhere nothing): for a caller that has just looked
// the pairs up (PairBatch and the like) and will read their counts after
// other work. It changes no answer and never fails. O(len(ps)).
func PrefetchTables(ps []PairStats, ok []bool) {
	if !canPrefetch {
		return
	}
	ok = ok[:len(ps)]
	var pb prefetchBatch
	for i := range ps {
		if !ok[i] || len(ps[i].counts) == 0 {
			continue
		}
		pb.add(unsafe.Pointer(&ps[i].counts[0]))
	}
	pb.flush()
}

// PrefetchEntity tells the index that the records of id that a decision
// reads first will soon be read: its value count, its marginal counts, and
// the first n entries of its neighbour list and of its ranked list. It reads
// the offsets of those (the loads are independent, so their cache misses
// overlap one another) and starts loading the cache lines of the data they
// name without waiting for them (amd64 and arm64: prefetch instructions;
// elsewhere nothing), so that the data arrives while the caller does other
// work. It changes no answer and never fails; an id out of range is
// skipped, and n ≤ 0 loads no list. O(n/16) prefetches.
func (x *Index) PrefetchEntity(id EntityID, n int) {
	if !canPrefetch {
		return
	}
	v := x.v.Load()
	if uint64(id) >= v.n {
		return
	}
	var pb prefetchBatch
	if int(id) < len(v.entVSet) {
		pb.add(unsafe.Pointer(&v.entVSet[id]))
	}
	if !v.uniform {
		if a, b, ok := span(v.margOffs, uint64(id), len(v.marg)); ok && a < b {
			pb.add(unsafe.Pointer(&v.marg[a]))
			pb.add(unsafe.Pointer(&v.marg[b-1]))
		}
	}
	if n > 0 {
		if s, e, ok := span(v.nbrOffs, uint64(id), len(v.nbrs)); ok {
			addLines(&pb, v.nbrs[s:min(e, s+n)])
		}
		if s, e, ok := span(v.rankOffs, uint64(id), len(v.rank)); ok {
			addLines(&pb, v.rank[s:min(e, s+n)])
		}
	}
	pb.flush()
}
