package graphidx

// EntityID is the dense identifier of an entity inside one index. IDs are
// assigned in ascending order of entity name, so they are stable for a given
// set of names and identical across builds of the same corpus.
type EntityID = uint32

// PresentValue is the single value label of entities in presence-only corpora.
const PresentValue = "present"

// MaxValues is the largest number of distinct values one entity may take.
const MaxValues = 64

// PairStats holds the co-occurrence statistics of an ordered pair (a, b).
//
// Counts are stored once per unordered pair in the orientation (lo, hi) with
// lo < hi. PairStats hides that: Count(u, v) always means "contexts with
// a=u and b=v", whichever way the pair is stored. The value is a view over
// the index's memory; it is valid until the index is closed and must not be
// modified.
type PairStats struct {
	A, B   EntityID
	KA, KB int      // number of values of A and of B
	counts []uint32 // row-major table in stored orientation
	// swapped is true when the stored orientation is (B, A).
	swapped bool
}

// NewPairStats returns statistics for (a, b) over a row-major table of
// ka×kb counts in the orientation (a, b). It is meant for tests and
// in-memory sources; indexes return views over their own storage.
func NewPairStats(a, b EntityID, ka, kb int, counts []uint32) PairStats {
	return PairStats{A: a, B: b, KA: ka, KB: kb, counts: counts}
}

// newStoredPairStats wraps a stored (lo, hi) table for the query (a, b).
func newStoredPairStats(a, b EntityID, ka, kb int, counts []uint32, swapped bool) PairStats {
	return PairStats{A: a, B: b, KA: ka, KB: kb, counts: counts, swapped: swapped}
}

// Count returns the number of contexts that observe A=u and B=v.
// It panics if u or v is out of range, like a slice index.
func (p PairStats) Count(u, v int) uint32 {
	if u < 0 || u >= p.KA || v < 0 || v >= p.KB {
		panic("graphidx: PairStats.Count value out of range")
	}
	if p.swapped {
		return p.counts[v*p.KA+u]
	}
	return p.counts[u*p.KB+v]
}

// RowSum returns the number of contexts that observe A=u together with any
// value of B (n_u in docs/DESIGN.md, Error model).
func (p PairStats) RowSum(u int) uint64 {
	var s uint64
	for v := 0; v < p.KB; v++ {
		s += uint64(p.Count(u, v))
	}
	return s
}

// Support returns the number of contexts that observe both A and B.
func (p PairStats) Support() uint64 {
	var s uint64
	for _, c := range p.counts {
		s += uint64(c)
	}
	return s
}

// EntityRecord describes one entity for the index writer.
type EntityRecord struct {
	Name string
	// Values are the entity's value labels in ascending byte order.
	Values []string
	// Marginal[v] is the number of contexts observing the entity with value v.
	Marginal []uint64
}

// PairRecord is the count table of one unordered pair for the index writer.
type PairRecord struct {
	A, B EntityID // A < B, positions in the entity list
	// Counts is the row-major KA×KB table: Counts[u*KB+v] counts contexts with A=u, B=v.
	Counts []uint32
}

// Support is the number of contexts in which both entities occur: the sum
// of the table, the quantity pruning ranks by. O(KA·KB).
func (p PairRecord) Support() uint64 { return sumCounts(p.Counts) }

// Source is the input of WriteFile: the compiled content of an index.
type Source interface {
	// Contexts is the number of contexts the counts were taken from.
	Contexts() uint64
	// Entities lists every entity in ascending name order; EntityID i is Entities()[i].
	Entities() []EntityRecord
	// Pairs calls fn for every kept pair in ascending (A, B) order, A < B.
	// It may be called more than once and must yield the same pairs each time.
	// The record is only valid during the call.
	Pairs(fn func(PairRecord) error) error
}
