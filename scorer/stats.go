package scorer

import "github.com/hopwise/hopwise/graphidx"

// Stats is the view of a locality index the scorer needs. *graphidx.Index
// satisfies it; tests may use an in-memory implementation.
type Stats interface {
	// NumValues returns K for the entity.
	NumValues(id graphidx.EntityID) int
	// Pair returns the statistics of the ordered pair (a, b); ok is false when
	// the pair was never observed together (or was pruned).
	Pair(a, b graphidx.EntityID) (ps graphidx.PairStats, ok bool)
}

// Marginals is an optional interface of a Stats: Marginal(id)[v] is the
// number of contexts that observe entity id with value v (K entries), or nil
// when unknown. *graphidx.Index satisfies it. With it the Bayes model's
// direct estimate shrinks toward the target's marginal instead of the
// uniform distribution (see Bayes, "Direct estimate").
type Marginals interface {
	Marginal(id graphidx.EntityID) []uint64
}
