package counts

import (
	"container/heap"
	"context"
	"fmt"
	"io"
	"maps"
	"math"
	"os"
	"slices"
	"strconv"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/internal/fileio"
)

// countsSource is the Source compiled from count sets without a Partial:
// the shard files are mapped read-only (read into memory where mmap is
// unavailable) and stay encoded (about 17 bytes per cell, against about 100
// for a Partial), so they occupy page cache the kernel can reclaim rather
// than heap; entities are merged into a table, and
// every call to Pairs k-way merges the shards' sorted pair sections,
// summing equal pairs. Pair records are strictly ascending by (A, B) name
// in every shard, and ids ascend with names, so the merge yields the
// pairs in ascending (A, B) id order as Source requires.
type countsSource struct {
	contexts uint64
	ents     []graphidx.EntityRecord
	id       map[string]uint32
	valIdx   []map[string]int
	pairs    [][]byte // pair section of every shard
	names    []string // file of every shard, for errors
	filter   *graphidx.PruneFilter
	release  []func() error // unmaps the shard files
	closed   bool

	counts []uint32 // reused table of the record handed to fn
	acc    []uint64
}

func (s *countsSource) Contexts() uint64                  { return s.contexts }
func (s *countsSource) Entities() []graphidx.EntityRecord { return s.ents }

// Close releases the mapped shard files; Pairs fails afterwards. It is
// idempotent. The Source returned by MergeCounts and CompileCounts
// implements io.Closer through it.
func (s *countsSource) Close() error {
	if s.closed {
		return nil
	}
	s.closed = true
	s.pairs = nil
	var first error
	for _, r := range s.release {
		if err := r(); err != nil && first == nil {
			first = err
		}
	}
	s.release = nil
	return first
}

// Pairs calls fn with every kept pair in ascending (A, B) order.
func (s *countsSource) Pairs(fn func(graphidx.PairRecord) error) error {
	if s.closed {
		return fmt.Errorf("graphidx: count source used after Close")
	}
	return s.merge(func(a, b uint32, counts []uint32, sup uint64) error {
		if !s.filter.Keep(a, b, sup) {
			return nil
		}
		return fn(graphidx.PairRecord{A: a, B: b, Counts: counts})
	})
}

// pairCursor decodes one shard's pair section, one record at a time. The
// section was fully checked by DecodeCountShard; the decoder still
// bounds-checks every read.
type pairCursor struct {
	d      countDecoder
	file   string
	a, b   string
	ul, vl []string
	counts []uint64
}

func (c *pairCursor) next() (bool, error) {
	if c.d.i >= len(c.d.b) {
		return false, nil
	}
	c.a, c.b = c.d.name(), c.d.name()
	c.ul = c.d.labels()
	c.vl = c.d.labels()
	c.counts = c.counts[:0]
	for range len(c.ul) * len(c.vl) {
		c.counts = append(c.counts, c.d.uvarint())
	}
	if c.d.err != nil {
		return false, fmt.Errorf("%s: %w", c.file, c.d.err)
	}
	return true, nil
}

type cursorHeap []*pairCursor

func (h cursorHeap) Len() int { return len(h) }
func (h cursorHeap) Less(i, j int) bool {
	return cmpPair(h[i].a, h[i].b, h[j].a, h[j].b) < 0
}
func (h cursorHeap) Swap(i, j int) { h[i], h[j] = h[j], h[i] }
func (h *cursorHeap) Push(x any)   { *h = append(*h, x.(*pairCursor)) }
func (h *cursorHeap) Pop() any {
	old := *h
	x := old[len(old)-1]
	*h = old[:len(old)-1]
	return x
}

// merge calls fn for every pair of the union of the shards, with its summed
// table in id order and its support, after checking it against the
// marginals. O(total pair bytes · log shards).
func (s *countsSource) merge(fn func(a, b uint32, counts []uint32, sup uint64) error) error {
	h := make(cursorHeap, 0, len(s.pairs))
	for i, sec := range s.pairs {
		c := &pairCursor{d: countDecoder{b: sec}, file: s.names[i]}
		ok, err := c.next()
		if err != nil {
			return err
		}
		if ok {
			h = append(h, c)
		}
	}
	heap.Init(&h)
	for len(h) > 0 {
		an, bn := h[0].a, h[0].b
		a, okA := s.id[an]
		b, okB := s.id[bn]
		if !okA || !okB {
			return fmt.Errorf("%w: %s: pair %s, %s names an entity with no marginal count", ErrBadCounts, h[0].file, strconv.Quote(an), strconv.Quote(bn))
		}
		ka, kb := len(s.ents[a].Values), len(s.ents[b].Values)
		s.acc = slices.Grow(s.acc[:0], ka*kb)[:ka*kb]
		clear(s.acc)
		for len(h) > 0 && h[0].a == an && h[0].b == bn {
			c := h[0]
			if err := s.add(c, a, b, kb); err != nil {
				return err
			}
			ok, err := c.next()
			if err != nil {
				return err
			}
			if ok {
				heap.Fix(&h, 0)
			} else {
				heap.Pop(&h)
			}
		}
		s.counts = slices.Grow(s.counts[:0], ka*kb)[:ka*kb]
		var sup uint64
		for i, x := range s.acc {
			if x > math.MaxUint32 {
				return fmt.Errorf("%w: pair %s, %s", graphidx.ErrCountOverflow, strconv.Quote(an), strconv.Quote(bn))
			}
			s.counts[i] = uint32(x)
			sup += x
		}
		if err := s.checkPair(a, b, ka, kb); err != nil {
			return err
		}
		if err := fn(a, b, s.counts, sup); err != nil {
			return err
		}
	}
	return nil
}

// add sums the cursor's current record into s.acc (row-major KA×KB in the
// entities' global value order).
func (s *countsSource) add(c *pairCursor, a, b uint32, kb int) error {
	ui := make([]int, len(c.ul))
	for i, u := range c.ul {
		j, ok := s.valIdx[a][u]
		if !ok {
			return fmt.Errorf("%w: %s: pair %s, %s has value %s of %s, which has no marginal count",
				ErrBadCounts, c.file, strconv.Quote(c.a), strconv.Quote(c.b), strconv.Quote(u), strconv.Quote(c.a))
		}
		ui[i] = j
	}
	for j, v := range c.vl {
		vi, ok := s.valIdx[b][v]
		if !ok {
			return fmt.Errorf("%w: %s: pair %s, %s has value %s of %s, which has no marginal count",
				ErrBadCounts, c.file, strconv.Quote(c.a), strconv.Quote(c.b), strconv.Quote(v), strconv.Quote(c.b))
		}
		for i := range c.ul {
			n := c.counts[i*len(c.vl)+j]
			cell := &s.acc[ui[i]*kb+vi]
			if *cell+n < *cell {
				return fmt.Errorf("%w: pair %s, %s", graphidx.ErrCountOverflow, strconv.Quote(c.a), strconv.Quote(c.b))
			}
			*cell += n
		}
	}
	return nil
}

// checkPair verifies that no row or column of the summed table exceeds the
// marginal of its value, as for any table counted from real contexts.
func (s *countsSource) checkPair(a, b uint32, ka, kb int) error {
	for u := range ka {
		var row uint64
		for v := range kb {
			row += uint64(s.counts[u*kb+v])
		}
		if row > s.ents[a].Marginal[u] {
			return s.aboveMarginal(a, b, a, u, row)
		}
	}
	for v := range kb {
		var col uint64
		for u := range ka {
			col += uint64(s.counts[u*kb+v])
		}
		if col > s.ents[b].Marginal[v] {
			return s.aboveMarginal(a, b, b, v, col)
		}
	}
	return nil
}

func (s *countsSource) aboveMarginal(a, b, e uint32, v int, n uint64) error {
	return fmt.Errorf("%w: pair %s, %s counts %d contexts with %s=%s, above its marginal %d", ErrBadCounts,
		strconv.Quote(s.ents[a].Name), strconv.Quote(s.ents[b].Name), n, s.ents[e].Name, s.ents[e].Values[v], s.ents[e].Marginal[v])
}

// loadCounts reads and checks every shard of the sets in dirs, merges their
// entity sections and keeps their pair sections for countsSource.merge.
// loadCounts maps and checks every shard of dirs and merges their entity
// sections. On error the shards mapped so far are released.
func loadCounts(ctx context.Context, dirs []string) (_ *countsSource, _ int64, err error) {
	s := &countsSource{id: map[string]uint32{}}
	defer func() {
		if err != nil {
			s.Close()
		}
	}()
	marg := map[string]map[string]uint64{}
	var bytesRead int64
	for _, dir := range dirs {
		paths, err := listCountSet(dir)
		if err != nil {
			return nil, bytesRead, err
		}
		for i, path := range paths {
			if err := ctx.Err(); err != nil {
				return nil, bytesRead, err
			}
			b, release, err := mapShard(path)
			if err != nil {
				return nil, bytesRead, err
			}
			if release != nil {
				s.release = append(s.release, release)
			}
			bytesRead += int64(len(b))
			hd, err := DecodeCountShard(b, path, nil)
			if err == nil && (hd.Shard != i || hd.Shards != len(paths)) {
				err = fmt.Errorf("%w: %s: header says shard %d of %d", ErrBadCounts, path, hd.Shard, hd.Shards)
			}
			if err != nil {
				return nil, bytesRead, err
			}
			if s.contexts+hd.Contexts < s.contexts {
				return nil, bytesRead, fmt.Errorf("%w: %s: context total overflows", ErrBadCounts, path)
			}
			s.contexts += hd.Contexts
			ent := b[countsHeaderSize : countsHeaderSize+hd.EntBytes]
			if err := addEntitySection(marg, ent, path); err != nil {
				return nil, bytesRead, err
			}
			s.pairs = append(s.pairs, b[countsHeaderSize+hd.EntBytes:])
			s.names = append(s.names, path)
		}
	}
	names := slices.Sorted(maps.Keys(marg))
	s.ents = make([]graphidx.EntityRecord, len(names))
	s.valIdx = make([]map[string]int, len(names))
	for i, n := range names {
		s.id[n] = uint32(i)
		vals := slices.Sorted(maps.Keys(marg[n]))
		if len(vals) > graphidx.MaxValues {
			return nil, bytesRead, fmt.Errorf("%w: entity %s has %d", graphidx.ErrTooManyValues, strconv.Quote(n), len(vals))
		}
		rec := graphidx.EntityRecord{Name: n, Values: vals, Marginal: make([]uint64, len(vals))}
		s.valIdx[i] = make(map[string]int, len(vals))
		var sum uint64
		for j, v := range vals {
			rec.Marginal[j] = marg[n][v]
			s.valIdx[i][v] = j
			sum += rec.Marginal[j]
		}
		if sum > s.contexts {
			return nil, bytesRead, fmt.Errorf("%w: entity %s observed in %d contexts, more than the %d counted", ErrBadCounts, strconv.Quote(n), sum, s.contexts)
		}
		s.ents[i] = rec
	}
	return s, bytesRead, nil
}

// mapShard maps a count-shard file read-only; release is nil when nothing
// was mapped (an empty file, or a platform without mmap, where the file is
// read). The bytes are bounds-checked by DecodeCountShard like read bytes.
func mapShard(path string) (b []byte, release func() error, err error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, fmt.Errorf("graphidx: read count shard: %w", err)
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, nil, fmt.Errorf("graphidx: read count shard: %w", err)
	}
	if st.Size() == 0 || !fileio.MmapSupported || st.Size() > math.MaxInt {
		b, err := io.ReadAll(f)
		if err != nil {
			return nil, nil, fmt.Errorf("graphidx: read count shard %s: %w", path, err)
		}
		return b, nil, nil
	}
	return fileio.MapFile(f, int(st.Size()))
}

// addEntitySection adds the entity records of one checked shard to marg.
func addEntitySection(marg map[string]map[string]uint64, ent []byte, path string) error {
	d := countDecoder{b: ent}
	for d.i < len(d.b) && d.err == nil {
		e := d.name()
		k := d.uvarint()
		m := marg[e]
		if m == nil {
			m = map[string]uint64{}
			marg[e] = m
		}
		for range k {
			v := d.name()
			n := d.uvarint()
			if d.err != nil {
				break
			}
			if m[v]+n < m[v] {
				return fmt.Errorf("%w: %s: marginal of %s=%s overflows", ErrBadCounts, path, e, v)
			}
			m[v] += n
		}
	}
	if d.err != nil {
		return fmt.Errorf("%s: %w", path, d.err)
	}
	return nil
}

// MergeCounts is CompileCounts over the union of several count-shard
// directories: counts are sums, so the result equals the compile of the
// concatenated corpora (an incremental update is MergeCounts(old, new)).
// The same set given twice (by any path, or a copy of it) is refused with
// ErrDuplicateCounts (CheckDistinctCountSets) instead of being counted twice.
//
// It streams: the shards are mapped read-only and checked once, and stay
// encoded (about 17 bytes per distinct cell) in page cache the kernel can
// reclaim, not in the Go heap; entities are merged into a table, and each
// pass over the pairs k-way merges the shards' sorted pair sections
// (container/heap), summing equal pairs and checking every summed table
// against the marginals. WriteFile and pruning take three passes.
// Heap: O(entities·K + shards); time O(bytes·log shards) per pass.
// The summary's SpillBytes holds the shard bytes read; Read is zero.
//
// The returned Source implements io.Closer: close it once it has been
// written, to unmap the shards (Pairs fails after Close). A shard file must
// not be truncated while its Source is open.
//
// Shard files are untrusted input: DecodeCountShard checks every length
// and offset, and the checksum, before a byte is used.
func MergeCounts(ctx context.Context, dirs []string, opts ...graphidx.BuildOption) (graphidx.Source, graphidx.BuildSummary, error) {
	start := time.Now()
	var sum graphidx.BuildSummary
	if len(dirs) == 0 {
		return nil, sum, fmt.Errorf("graphidx: MergeCounts: no directories")
	}
	if err := CheckDistinctCountSets(dirs); err != nil {
		return nil, sum, err
	}
	if err := graphidx.CheckBuildOptions(opts); err != nil {
		return nil, sum, err
	}
	s, n, err := loadCounts(ctx, dirs)
	sum.SpillBytes = n
	if err != nil {
		return nil, sum, err
	}
	f, st, err := graphidx.PlanPrune(len(s.ents), opts, func(fn func(a, b uint32, sup uint64) error) error {
		return s.merge(func(a, b uint32, _ []uint32, sup uint64) error { return fn(a, b, sup) })
	})
	if err != nil {
		s.Close()
		return nil, sum, err
	}
	s.filter = f
	sum.Contexts = s.contexts
	sum.Entities = len(s.ents)
	for _, e := range s.ents {
		for _, m := range e.Marginal {
			sum.Observations += m
		}
	}
	sum.Pairs = st
	sum.Workers = 1
	sum.Elapsed = time.Since(start)
	return s, sum, nil
}
