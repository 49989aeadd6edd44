package graphidx

import (
	"bufio"
	"container/heap"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math/bits"
	"os"
	"path/filepath"
	"slices"
)

// Pair cell keys. One counted cell, "a context observed entity a with value
// u and entity b with value v", is a uint64:
//
//	a<<38 | b<<12 | u<<6 | v      (a, b: 26-bit entity ids; u, v: 6-bit values)
//
// so 2^26 entities and MaxValues = 64 values fit exactly, key 0 never occurs
// (a ≠ b), and sorting keys groups the cells of one pair (a, b) together.
// Inside a worker a and b are provisional ids (first-seen order, a < b); in
// runs they are oriented by entity name; in the merge they are final ids.
const (
	keyEntityBits = 26
	maxEntities   = 1 << keyEntityBits
	keyEntMask    = maxEntities - 1
)

func cellKey(a, b, u, v uint32) uint64 {
	return uint64(a)<<38 | uint64(b)<<12 | uint64(u)<<6 | uint64(v)
}

func splitKey(k uint64) (a, b, u, v uint32) {
	return uint32(k >> 38), uint32(k>>12) & keyEntMask, uint32(k>>6) & 63, uint32(k) & 63
}

// cell is one slot of the counting table and one record of a run.
type cell struct {
	key uint64
	n   uint32
}

const cellBytes = 16 // unsafe.Sizeof(cell{}) with padding

// pairTab is an open-addressing (linear probing) hash table from cell keys
// to uint32 counts, with Fibonacci hashing. Load factor ≤ 3/4. Not safe for
// concurrent use; each build worker owns one.
type pairTab struct {
	slots []cell
	used  int
	shift uint
	limit int
	sink  uint64 // keeps the prefetching loads of addKeys alive
	// sorted holds the final drained cells once the worker is done.
	sorted []cell
	buf    []cell // radix sort scratch
}

func newPairTab(slots int) *pairTab {
	t := &pairTab{}
	t.alloc(slots)
	return t
}

func (t *pairTab) alloc(slots int) {
	t.slots = make([]cell, slots)
	t.shift = uint(64 - bits.TrailingZeros(uint(slots)))
	t.limit = slots / 4 * 3
	t.used = 0
}

// add counts one occurrence of key; it reports false if the count wrapped
// around (more than MaxUint32 occurrences).
func (t *pairTab) add(key uint64) bool {
	mask := uint64(len(t.slots) - 1)
	i := (key * 0x9E3779B97F4A7C15) >> t.shift
	for {
		s := &t.slots[i]
		if s.key == key {
			s.n++
			return s.n != 0
		}
		if s.key == 0 {
			s.key, s.n = key, 1
			t.used++
			return true
		}
		i = (i + 1) & mask
	}
}

func (t *pairTab) bytes() int64 { return int64(len(t.slots)) * cellBytes }

// grow doubles the table.
func (t *pairTab) grow() {
	t.buf = nil
	old := t.slots
	t.alloc(2 * len(old))
	mask := uint64(len(t.slots) - 1)
	for _, c := range old {
		if c.key == 0 {
			continue
		}
		i := (c.key * 0x9E3779B97F4A7C15) >> t.shift
		for t.slots[i].key != 0 {
			i = (i + 1) & mask
		}
		t.slots[i] = c
		t.used++
	}
}

// drain compacts the table, rewrites every key into its name-ordered form
// under rank (rank[prov] = position of the entity in name order) and sorts
// the cells. The result may alias the table, which must be reset before
// reuse; sorting may allocate a buffer of the same length (within the
// budget's growth headroom). O(n).
func (t *pairTab) drain(rank []uint32) []cell {
	n := 0
	for _, c := range t.slots {
		if c.key != 0 {
			t.slots[n] = c
			n++
		}
	}
	cells := t.slots[:n]
	for i := range cells {
		a, b, u, v := splitKey(cells[i].key)
		ra, rb := rank[a], rank[b]
		if ra > rb {
			ra, rb, u, v = rb, ra, v, u
		}
		cells[i].key = cellKey(ra, rb, u, v)
	}
	if len(cells) >= 1<<12 && cap(t.buf) < len(cells) {
		// Kept across spills so sorting does not churn the heap; dropped
		// when the table grows (see makeRoom's accounting).
		t.buf = make([]cell, len(cells))
	}
	return sortCells(cells, t.buf)
}

func cmpCell(x, y cell) int {
	switch {
	case x.key < y.key:
		return -1
	case x.key > y.key:
		return 1
	}
	return 0
}

// sortCells sorts cells by key. Small inputs use pdqsort in place; larger
// ones an LSD radix sort with 11-bit digits through buf (at least as long),
// skipping digits that all keys share. O(n·d) for d ≤ 6 passes. The result
// is cells or buf.
func sortCells(cells, buf []cell) []cell {
	if len(cells) < 1<<12 {
		slices.SortFunc(cells, cmpCell)
		return cells
	}
	a := cells
	buf = buf[:len(cells)]
	var count [1 << 11]int
	for shift := uint(0); shift < 64; shift += 11 {
		clear(count[:])
		for i := range a {
			count[(a[i].key>>shift)&2047]++
		}
		if count[(a[0].key>>shift)&2047] == len(a) {
			continue
		}
		sum := 0
		for d, c := range count {
			count[d] = sum
			sum += c
		}
		for i := range a {
			d := (a[i].key >> shift) & 2047
			buf[count[d]] = a[i]
			count[d]++
		}
		a, buf = buf, a
	}
	return a
}

func (t *pairTab) reset() {
	clear(t.slots)
	t.used = 0
}

// runFile is one spilled run on disk: 12-byte little-endian records (key,
// count), ascending by key. Keys are name-oriented provisional keys
// (final=false) or final keys written by an intermediate merge (final=true).
type runFile struct {
	path  string
	cells int64
	final bool
}

// writeRun writes cells to a new file in dir. When toProv is not nil each
// key's entity ranks are mapped back to provisional ids (order[rank]).
func writeRun(path string, cells []cell, order []uint32) (int64, error) {
	f, err := os.Create(path)
	if err != nil {
		return 0, err
	}
	w := bufio.NewWriterSize(f, 256<<10)
	var rec [12]byte
	for _, c := range cells {
		k := c.key
		if order != nil {
			a, b, u, v := splitKey(k)
			k = cellKey(order[a], order[b], u, v)
		}
		binary.LittleEndian.PutUint64(rec[:8], k)
		binary.LittleEndian.PutUint32(rec[8:], c.n)
		w.Write(rec[:])
	}
	err = w.Flush()
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return 0, fmt.Errorf("graphidx: writing run %s: %w", filepath.Base(path), err)
	}
	return int64(len(cells)) * 12, nil
}

// cellSource yields cells in ascending final-key order.
type cellSource interface {
	next() (cell, bool, error)
	close() error
}

type memRun struct {
	cells []cell
	i     int
}

func (m *memRun) next() (cell, bool, error) {
	if m.i >= len(m.cells) {
		return cell{}, false, nil
	}
	m.i++
	return m.cells[m.i-1], true, nil
}

func (m *memRun) close() error { m.cells = nil; return nil }

type fileRun struct {
	f     *os.File
	br    *bufio.Reader
	final []uint32 // provisional id → final id; nil when keys are final
	rec   [12]byte
}

func openRun(r runFile, final []uint32, bufSize int) (*fileRun, error) {
	f, err := os.Open(r.path)
	if err != nil {
		return nil, err
	}
	fr := &fileRun{f: f, br: bufio.NewReaderSize(f, bufSize)}
	if !r.final {
		fr.final = final
	}
	return fr, nil
}

func (r *fileRun) next() (cell, bool, error) {
	if _, err := io.ReadFull(r.br, r.rec[:]); err != nil {
		if err == io.EOF {
			return cell{}, false, nil
		}
		return cell{}, false, fmt.Errorf("graphidx: reading run %s: %w", r.f.Name(), err)
	}
	k := binary.LittleEndian.Uint64(r.rec[:8])
	if r.final != nil {
		a, b, u, v := splitKey(k)
		if int(a) >= len(r.final) || int(b) >= len(r.final) {
			return cell{}, false, fmt.Errorf("graphidx: run %s: entity id out of range", r.f.Name())
		}
		k = cellKey(r.final[a], r.final[b], u, v)
	}
	return cell{key: k, n: binary.LittleEndian.Uint32(r.rec[8:])}, true, nil
}

func (r *fileRun) close() error { return r.f.Close() }

// cellMerger is a k-way merge of cell sources on a min-heap (container/heap)
// that sums equal keys. O(total cells · log k).
type cellMerger struct {
	items []mergeItem
	srcs  []cellSource
}

type mergeItem struct {
	c   cell
	src cellSource
}

func (m *cellMerger) Len() int           { return len(m.items) }
func (m *cellMerger) Less(i, j int) bool { return m.items[i].c.key < m.items[j].c.key }
func (m *cellMerger) Swap(i, j int)      { m.items[i], m.items[j] = m.items[j], m.items[i] }
func (m *cellMerger) Push(x any)         { m.items = append(m.items, x.(mergeItem)) }
func (m *cellMerger) Pop() any {
	it := m.items[len(m.items)-1]
	m.items = m.items[:len(m.items)-1]
	return it
}

func newCellMerger(srcs []cellSource) (*cellMerger, error) {
	m := &cellMerger{srcs: srcs}
	for _, s := range srcs {
		c, ok, err := s.next()
		if err != nil {
			return m, err
		}
		if ok {
			m.items = append(m.items, mergeItem{c, s})
		}
	}
	heap.Init(m)
	return m, nil
}

// errCellOverflow is wrapped by errors about a count above MaxUint32.
var errCellOverflow = errors.New("count exceeds the uint32 range of a pair table cell")

// each calls fn with every distinct key and the sum of its counts, in
// ascending key order.
func (m *cellMerger) each(fn func(key uint64, n uint64) error) error {
	if len(m.items) <= 4 {
		return m.eachFew(fn)
	}
	for len(m.items) > 0 {
		top := m.items[0].c.key
		var sum uint64
		for len(m.items) > 0 && m.items[0].c.key == top {
			sum += uint64(m.items[0].c.n)
			c, ok, err := m.items[0].src.next()
			if err != nil {
				return err
			}
			if ok {
				if c.key < top {
					return fmt.Errorf("graphidx: spill run out of order")
				}
				m.items[0].c = c
				heap.Fix(m, 0)
			} else {
				heap.Pop(m)
			}
		}
		if err := fn(top, sum); err != nil {
			return err
		}
	}
	return nil
}

// eachFew is each for at most 4 sources: a linear scan for the minimum is
// cheaper than the heap's interface calls at that size.
func (m *cellMerger) eachFew(fn func(key uint64, n uint64) error) error {
	items := m.items
	for len(items) > 0 {
		top := items[0].c.key
		for _, it := range items[1:] {
			top = min(top, it.c.key)
		}
		var sum uint64
		for i := 0; i < len(items); {
			if items[i].c.key != top {
				i++
				continue
			}
			sum += uint64(items[i].c.n)
			c, ok, err := items[i].src.next()
			if err != nil {
				return err
			}
			if !ok {
				items = append(items[:i], items[i+1:]...)
				continue
			}
			if c.key <= top {
				return fmt.Errorf("graphidx: spill run out of order")
			}
			items[i].c = c
			i++
		}
		if err := fn(top, sum); err != nil {
			return err
		}
	}
	m.items = items
	return nil
}

func (m *cellMerger) close() error {
	var errs []error
	for _, s := range m.srcs {
		errs = append(errs, s.close())
	}
	return errors.Join(errs...)
}

// pairStore holds compiled pair records (A, B uint32, then KA×KB uint32
// counts, little-endian) in memory and moves them to a temp file when they
// outgrow memLimit.
type pairStore struct {
	dir      string
	memLimit int64
	buf      []byte
	f        *os.File
	w        *bufio.Writer
	n        uint64
	bytes    int64
	tmp      [8]byte
}

func (s *pairStore) put(a, b uint32, counts []uint32) error {
	need := 8 + 4*len(counts)
	if s.f == nil && int64(len(s.buf)+need) > s.memLimit {
		f, err := os.CreateTemp(s.dir, "pairs-*")
		if err != nil {
			return err
		}
		s.f = f
		s.w = bufio.NewWriterSize(f, 256<<10)
		if _, err := s.w.Write(s.buf); err != nil {
			return err
		}
		s.buf = nil
	}
	tmp := s.tmp[:]
	binary.LittleEndian.PutUint32(tmp[:4], a)
	binary.LittleEndian.PutUint32(tmp[4:], b)
	s.n++
	s.bytes += int64(need)
	if s.f == nil {
		s.buf = append(s.buf, tmp[:]...)
		for _, c := range counts {
			s.buf = binary.LittleEndian.AppendUint32(s.buf, c)
		}
		return nil
	}
	s.w.Write(tmp[:])
	for _, c := range counts {
		binary.LittleEndian.PutUint32(tmp[:4], c)
		s.w.Write(tmp[:4])
	}
	return nil
}

// seal finishes writing.
func (s *pairStore) seal() error {
	if s.w != nil {
		return s.w.Flush()
	}
	return nil
}

// each replays the records; k[i] is the number of values of entity i. The
// counts slice passed to fn is reused.
func (s *pairStore) each(k []uint8, fn func(a, b uint32, counts []uint32) error) error {
	var r io.Reader
	if s.f != nil {
		if _, err := s.f.Seek(0, io.SeekStart); err != nil {
			return err
		}
		r = bufio.NewReaderSize(s.f, 256<<10)
	}
	var counts []uint32
	pos := 0
	var raw []byte
	for i := uint64(0); i < s.n; i++ {
		var hdr []byte
		if r == nil {
			hdr = s.buf[pos : pos+8]
			pos += 8
		} else {
			raw = slices.Grow(raw[:0], 8)[:8]
			if _, err := io.ReadFull(r, raw); err != nil {
				return fmt.Errorf("graphidx: reading compiled pairs: %w", err)
			}
			hdr = raw
		}
		a, b := binary.LittleEndian.Uint32(hdr), binary.LittleEndian.Uint32(hdr[4:])
		if int(a) >= len(k) || int(b) >= len(k) {
			return fmt.Errorf("graphidx: compiled pairs: entity id out of range")
		}
		nc := int(k[a]) * int(k[b])
		var body []byte
		if r == nil {
			body = s.buf[pos : pos+4*nc]
			pos += 4 * nc
		} else {
			raw = slices.Grow(raw[:0], 4*nc)[:4*nc]
			if _, err := io.ReadFull(r, raw); err != nil {
				return fmt.Errorf("graphidx: reading compiled pairs: %w", err)
			}
			body = raw
		}
		counts = slices.Grow(counts[:0], nc)[:nc]
		for j := range counts {
			counts[j] = binary.LittleEndian.Uint32(body[4*j:])
		}
		if err := fn(a, b, counts); err != nil {
			return err
		}
	}
	return nil
}

func (s *pairStore) close() error {
	s.buf = nil
	if s.f != nil {
		name := s.f.Name()
		err := s.f.Close()
		s.f = nil
		return errors.Join(err, os.Remove(name))
	}
	return nil
}

// sumCounts returns the support of a table.
func sumCounts(c []uint32) uint64 {
	var s uint64
	for _, x := range c {
		s += uint64(x)
	}
	return s
}
