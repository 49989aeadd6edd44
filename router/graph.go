package router

import (
	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

// Graph is the read view of a locality index the router needs.
// *graphidx.Index satisfies it. Implementations must be safe for concurrent
// readers and must not allocate on the lookup paths. Pair(a, b) must be ok
// only when b is in Neighbors(a) (as for an index): the search reads chains
// from the lists, and answers a pair with a query's endpoint whose list
// leaves the other entity out as not observed, without a look-up.
//
// Two optional methods make the search faster without changing any
// decision; *graphidx.Index has both, and a wrapper around an index should
// forward them: PairBatch (see PairBatcher), and RankPrefix() int, the
// length of the ranked prefix, which tells that a RankedNeighbors list
// shorter than it holds every neighbour (so the search need not read
// Neighbors to know). PairBatchRanked (see RankedPairBatcher), or
// PairBatchHinted with RankedPairHints (see HintedPairBatcher), lets the
// joins read the edges they reached through ranked lists without a binary
// search; a wrapper should forward them too, and PrefetchRankedOffsets
// with PrefetchRankedHeads (see RankedPrefetcher), which let the first
// layers' ranked lists load while the direct estimate and the one-bridge
// phase run, PrefetchEntity (see EntityPrefetcher), which lets the
// endpoints' records load as soon as their names are looked up, and
// LookupTwo (see TwoLookuper), which looks a query's two
// names up with overlapping cache misses. A third, AppendName (see NameAppender), spares the
// per-bridge copy that Name makes. A fourth, Marginal (scorer.Marginals),
// gives the Bayes model the target's marginal counts, toward which it
// shrinks the direct estimate of a pair seen rarely or never; a wrapper
// should forward it too, or the model falls back to a uniform prior.
type Graph interface {
	scorer.Stats
	// Lookup maps an entity name to its id.
	Lookup(name string) (graphidx.EntityID, bool)
	// Name returns the entity's name.
	Name(id graphidx.EntityID) string
	// Values returns the entity's value labels (ascending byte order). The
	// slice belongs to the index and must not be modified.
	Values(id graphidx.EntityID) []string
	// ValueIndex maps a value label of the entity to its position.
	ValueIndex(id graphidx.EntityID, label string) (int, bool)
	// Neighbors returns the entity's neighbours in ascending id order.
	Neighbors(id graphidx.EntityID) []graphidx.EntityID
	// RankedNeighbors returns neighbours by descending pair support (ties by
	// ascending id). It may be a prefix of the full list; see RankPrefix.
	RankedNeighbors(id graphidx.EntityID) []graphidx.EntityID
	// NumEntities is the number of entities.
	NumEntities() int
	// Generation identifies the index content (a fingerprint of its bytes).
	Generation() uint64
}

// NameAppender is an optional interface of a Graph: AppendName appends the
// bytes of the entity's name (the string Name returns) to dst and returns
// the extended slice, allocating only when dst must grow. When the graph
// implements it, a decision copies its bridge names straight into its own
// result block instead of calling Name, which for an index that hands out
// copies costs one allocation per bridge. A wrapper around such a graph
// should forward the method.
type NameAppender interface {
	AppendName(dst []byte, id graphidx.EntityID) []byte
}

// TwoLookuper is an optional interface of a Graph: LookupTwo(a, b) returns
// what Lookup(a) and Lookup(b) return, in less time (*graphidx.Index reads
// both names' cache lines together, so that their misses overlap). The
// router looks a query's two endpoints up with it. A wrapper around an
// Index should forward it.
type TwoLookuper interface {
	LookupTwo(a, b string) (ida graphidx.EntityID, oka bool, idb graphidx.EntityID, okb bool)
}
